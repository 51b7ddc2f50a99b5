# Study file version 2: a rate names whose day it follows, and a rate without "when"
# occurs at any time (version 1: while awake).
#
# Stored studies keep their figures: every rate without "when" is given "awake", the
# meaning it had, and in a study where more than one person has an asleep window every
# rate that follows someone's day names the first of them, as version 1 took it.

from django.db import migrations, models


def _sleepers(apps, study_id):
    agent_model = apps.get_model("allocation", "Agent")
    return list(
        agent_model.objects.filter(study_id=study_id, kind="human")
        .exclude(asleep_from="")
        .order_by("position", "pk")
        .values_list("key", flat=True)
    )


def _upgraded(rule: dict, first_sleeper: str | None) -> dict:
    """A version 1 rate (event or task occurrence) in version 2's terms."""
    rule = dict(rule)
    if rule.get("per_day") is not None and not rule.get("when"):
        rule["when"] = "awake"
    follows = rule.get("when") in ("awake", "asleep") or rule.get("every_days") is not None
    if follows and first_sleeper and not rule.get("of"):
        rule["of"] = first_sleeper
    return rule


def forwards(apps, schema_editor):
    study_model = apps.get_model("allocation", "Study")
    event_model = apps.get_model("allocation", "Event")
    task_model = apps.get_model("allocation", "Task")
    for study_id in study_model.objects.values_list("pk", flat=True).iterator():
        sleepers = _sleepers(apps, study_id)
        first = sleepers[0] if len(sleepers) > 1 else None
        for event in event_model.objects.filter(study_id=study_id):
            rule = _upgraded(
                {"per_day": event.per_day, "when": event.when, "every_days": event.every_days},
                first,
            )
            if rule.get("when", "") != event.when or rule.get("of", "") != event.of:
                event.when = rule.get("when", "")
                event.of = rule.get("of", "")
                event.save(update_fields=["when", "of"])
        for task in task_model.objects.filter(study_id=study_id, occurs__isnull=False):
            if not isinstance(task.occurs, dict):
                continue
            rule = _upgraded(task.occurs, first)
            if rule != task.occurs:
                task.occurs = rule
                task.save(update_fields=["occurs"])


class Migration(migrations.Migration):
    dependencies = [
        ("allocation", "0009_simulation_progress"),
    ]

    operations = [
        migrations.AddField(
            model_name="event",
            name="of",
            field=models.CharField(blank=True, max_length=64),
        ),
        migrations.RunPython(forwards, migrations.RunPython.noop),
    ]
