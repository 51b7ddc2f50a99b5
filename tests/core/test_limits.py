"""The limits are listed in one place and the README's Operations section lists each one."""

from __future__ import annotations

from pathlib import Path

from allocation.core import limits

README = Path(__file__).resolve().parents[2] / "README.md"


def test_every_limit_constant_is_listed_once():
    constants = {
        name
        for name, value in vars(limits).items()
        if name.isupper() and name != "LIMITS" and isinstance(value, int | float)
    }
    listed = [limit.name for limit in limits.LIMITS]
    assert sorted(listed) == sorted(set(listed)), "a limit is listed twice"
    assert set(listed) == constants
    for limit in limits.LIMITS:
        assert getattr(limits, limit.name) == limit.value, limit.name
        assert limit.value > 0, limit.name


def test_the_readme_lists_every_limit_with_its_value():
    operations = README.read_text(encoding="utf-8").split("## Operations", 1)[1]
    for limit in limits.LIMITS:
        assert f"`{limit.name}`" in operations, f"{limit.name} is missing from the README"


def test_a_list_past_its_limit_is_refused_at_its_path_before_its_items_are_read():
    # Hand-built: one more task than the limit, each item unreadable (a number), so an
    # item read would add a problem per item; the refusal is the list's alone.
    from allocation.core import load_study

    tasks = [0] * (limits.STUDY_MAX_TASKS + 1)
    result = load_study(
        {"format": "baton.study", "version": 2, "study": {"id": "s", "title": "S"}, "tasks": tasks}
    )
    paths = [problem.path for problem in result.errors]
    assert "$.tasks" in paths
    assert not any(path.startswith("$.tasks[") for path in paths)
    message = next(p.message for p in result.errors if p.path == "$.tasks")
    assert f"{limits.STUDY_MAX_TASKS + 1:,} tasks" in message
    assert "STUDY_MAX_TASKS" in message
