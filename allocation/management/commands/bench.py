"""``manage.py bench``: speed of the analyses, as ratios measured in one run.

Generates seeded studies of 1,000 tasks / 3,000 links / 20 events / 4 plans and of ten
times the tasks (past ``STUDY_MAX_TASKS``, the most a study may hold, read without the
study checks), and measures the floor (load and check the study file, build the task
graph) and the analysis of one plan, then how long
a snapshot takes to verify (in the form snapshots were taken in before RFC 8785, and in
the current one). Each figure is the median of a few repeats with the garbage collector
paused, as ``timeit`` does; the same figures with it running (on the objects each run
makes) are printed beside them.
Then one incremental edit of a plan (a task's assignment changed and the headline read
again, the median over random tasks of the 1,000-task study) against one full analysis,
and the peak memory of analysing a study of ten times the tasks (read past the product's
study limit: the engine's own reach).
``--at-limit`` adds the pages of a study at the size limits: the study page, the plan
editor, the inventory and a dashboard, read cold and warm, with their size and memory.
"""

from __future__ import annotations

import gc
import io
import json
import random
import statistics
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager

from django.core.management.base import BaseCommand

from allocation.core import load_study, load_study_text
from allocation.core.analysis import PlanEvaluation, analyse_plan, prepare
from allocation.core.analysis.modecheck import verify_mode_map
from allocation.core.assumptions import resolve_assumptions
from allocation.core.canonical import BATON_1, CURRENT_FORM, canonical_json, digest, verify
from allocation.core.graph import task_graph
from allocation.core.limits import (
    CHAIN_ENTRIES_MAX,
    MODE_STEPS_MAX,
    STUDY_MAX_LINKS,
    STUDY_MAX_PLAN_TASKS,
    STUDY_MAX_TASKS,
)
from allocation.core.model import Assignment, Study
from allocation.core.reading import StudyReader
from allocation.core.registry import FIGURES, figure_text
from allocation.core.simulation import simulate
from allocation.core.synthetic import long_chain_study, synthetic_study
from allocation.core.writing import study_to_json
from allocation.examples import example_paths

#: Targets of the analysis engine (analysis within 1.5x the floor; ten times the
#: tasks within twelve times the time, that is within 1.2 times linear growth: the target
#: for the large study is 1.2 times its ratio of tasks).
ANALYSIS_OVER_FLOOR = 1.5
SCALING_LIMIT = 12.0
SCALING_OVER_LINEAR = SCALING_LIMIT / 10
#: Opening the plan editor and saving one row, against a trivial page (target).
PAGE_LIMIT = 10.0
#: 1,000 simulated days of the 1,000-task study within this many analyses (target).
SIMULATION_DAYS = 1000
SIMULATION_LIMIT = 30.0
#: One edit of one task's assignment within this share of a full analysis (target).
EDIT_LIMIT = 0.02
#: Tasks of the study whose analysis's peak memory is measured, and its target (MB).
MEMORY_TASKS = 10_000
MEMORY_LIMIT_MB = 500
#: The edits timed: a task to the generated studies' person, then to a device.
CHOICES = (Assignment(human="person"), Assignment(automation="device-0"))


def _read_unchecked(document: dict) -> Study:
    """A generated study read past the product's size limits (the engine's own reach),
    without the study checks: the generator makes valid studies."""

    class Unlimited(StudyReader):
        def _too_large(self, root: dict) -> bool:
            return False

    study = Unlimited().study(document)
    assert study is not None
    return study


def _median_seconds(work: Callable[[], object], repeats: int, collect: bool) -> float:
    """Median time of ``work``; with ``collect``, the collector runs but the objects that
    already exist (the inputs, earlier studies) are frozen out of its passes, so that only
    the work's own objects are collected, as in a server process that has settled."""
    times = []
    for _ in range(repeats):
        gc.collect()
        gc.freeze()
        if not collect:
            gc.disable()
        try:
            start = time.perf_counter()
            work()
            times.append(time.perf_counter() - start)
        finally:
            gc.enable()
            gc.unfreeze()
    return statistics.median(times)


def _peak_memory(work: Callable[[], bytes]) -> tuple[float, float, int]:
    """Run ``work`` once in a forked process: its resident memory before, its peak (MB),
    and the length of what it returned. A fork starts with the parent's pages, so the
    difference is what the work itself needed."""
    import multiprocessing

    def status(key: str) -> float:
        with open("/proc/self/status", encoding="ascii") as lines:
            for line in lines:
                if line.startswith(key + ":"):
                    return int(line.split()[1]) / 1024  # kB
        return float("nan")

    def child(pipe) -> None:
        before = status("VmRSS")
        size = len(work())
        pipe.send((before, status("VmHWM"), size))

    context = multiprocessing.get_context("fork")
    receive, send = context.Pipe(duplex=False)
    process = context.Process(target=child, args=(send,))
    process.start()
    result = receive.recv()
    process.join()
    return result


@contextmanager
def _throwaway_database() -> Iterator[None]:
    """A test database made for the measurement and dropped after it; inside a test run,
    that run's own database."""
    from django.db import connection
    from django.test.utils import setup_test_environment, teardown_test_environment

    try:
        setup_test_environment()
    except RuntimeError:  # already inside a test run, on its test database
        yield
        return
    old_name = connection.creation.create_test_db(verbosity=0, autoclobber=True)
    try:
        yield
    finally:
        connection.creation.destroy_test_db(old_name, verbosity=0)
        teardown_test_environment()


class Command(BaseCommand):
    help = "Measure the analysis engine against its targets; prints ratios from one run."

    def add_arguments(self, parser) -> None:
        parser.add_argument("--repeats", type=int, default=3)
        parser.add_argument("--seed", type=int, default=1)
        parser.add_argument(
            "--large",
            type=int,
            default=MEMORY_TASKS,
            help=f"tasks in the large study (default {MEMORY_TASKS:,}, ten times the small "
            f"one; past {STUDY_MAX_TASKS:,}, the most a study may hold, it is read without "
            "the study checks)",
        )
        parser.add_argument(
            "--memory-tasks",
            type=int,
            default=MEMORY_TASKS,
            help=f"tasks in the study whose analysis's peak memory is measured (default "
            f"{MEMORY_TASKS:,}; the target is for that size)",
        )
        parser.add_argument("--no-web", action="store_true", help="skip the page timings")
        parser.add_argument(
            "--no-simulation", action="store_true", help="skip the day simulation timing"
        )
        parser.add_argument(
            "--no-snapshots", action="store_true", help="skip the snapshot verification timing"
        )
        parser.add_argument(
            "--at-limit",
            action="store_true",
            help="also time the pages of a study at the size limits (a few minutes)",
        )
        parser.add_argument(
            "--export",
            action="store_true",
            help="also time the printable report (HTML and PDF; a few minutes)",
        )

    def handle(
        self,
        *args,
        repeats: int,
        seed: int,
        large: int,
        memory_tasks: int,
        no_web: bool,
        no_simulation: bool,
        no_snapshots: bool,
        export: bool,
        at_limit: bool,
        **options,
    ) -> None:
        self.engine(repeats=repeats, seed=seed, large=large)
        self.stdout.write("")
        self.edits(repeats=repeats, seed=seed)
        self.stdout.write("")
        self.memory(seed=seed, tasks=memory_tasks)
        self.stdout.write("")
        self.chains()
        if not no_snapshots:
            self.stdout.write("")
            self.snapshots(repeats=repeats, seed=seed)
        if not no_simulation:
            self.stdout.write("")
            self.simulation(repeats=repeats, seed=seed)
        if export:
            self.stdout.write("")
            self.export(repeats=repeats, seed=seed)
        if not no_web:
            self.stdout.write("")
            self.pages(repeats=max(repeats, 5), seed=seed)
            self.stdout.write("")
            self.pending_imports(repeats=max(repeats, 5))
        if at_limit:
            self.stdout.write("")
            self.mode_check_at_limit(repeats=repeats)
            self.stdout.write("")
            self.pages_at_limit(seed=seed)

    def engine(self, *, repeats: int, seed: int, large: int) -> None:
        rows = {}
        for size in (1000, large):
            document = synthetic_study(
                tasks=size, links=3 * size, events=20, plans=4 if size <= 5000 else 2, seed=seed
            )
            study = _read_unchecked(document)
            graph = prepare(study)
            plan = study.plans[1].id  # a plan with a mode map

            def floor(document=document, size=size):
                loaded = _read_unchecked(document) if size > STUDY_MAX_TASKS else None
                loaded = loaded or load_study(document).study
                prepare(loaded)
                task_graph(loaded)

            def analysis(study=study, graph=graph, plan=plan):
                analyse_plan(study, plan, graph=graph)

            if size == 1000:
                modes = study.plan(plan).modes
                verify_s = _median_seconds(
                    lambda study=study, plan=plan: verify_mode_map(
                        study, study.plan(plan), resolve_assumptions(study.assumptions)
                    ),
                    repeats,
                    True,
                )
                self.stdout.write(
                    f"mode-map verification of {plan} ({len(modes.states)} modes, "
                    f"{len(modes.transitions)} transitions): {verify_s * 1000:.1f} ms"
                )
            rows[size] = {
                collect: (
                    _median_seconds(floor, repeats, collect),
                    _median_seconds(analysis, repeats, collect),
                )
                for collect in (False, True)
            }
            self.stdout.write(
                f"{size:>6} tasks, {len(study.links)} links, {len(study.events)} events, "
                f"{len(study.plans)} plans (seed {seed})"
            )
            for collect, label in ((False, "gc paused"), (True, "gc running")):
                floor_s, analysis_s = rows[size][collect]
                self.stdout.write(
                    f"    {label:10}  floor {floor_s * 1000:8.1f} ms   analysis of {plan} "
                    f"{analysis_s * 1000:8.1f} ms   analysis / floor {analysis_s / floor_s:5.2f}"
                )
        self.stdout.write("")
        target = SCALING_OVER_LINEAR * large / 1000
        for collect, label in ((False, "gc paused"), (True, "gc running")):
            small_floor, small_analysis = rows[1000][collect]
            large_floor, large_analysis = rows[large][collect]
            over = small_analysis / small_floor
            scale = large_analysis / small_analysis
            whole = (large_floor + large_analysis) / (small_floor + small_analysis)
            self.stdout.write(
                f"{label:10}  analysis / floor at 1,000 tasks {over:5.2f} (target <= "
                f"{ANALYSIS_OVER_FLOOR:g}: {'met' if over <= ANALYSIS_OVER_FLOOR else 'MISSED'})"
                f";  {large:,} / 1,000 tasks: analysis {scale:5.2f}x, floor and analysis "
                f"{whole:5.2f}x (target <= {target:g}: "
                f"{'met' if scale <= target else 'MISSED'})"
            )

    def edits(self, *, repeats: int, seed: int) -> None:
        """One task's assignment changed, and the figures read again, against one full
        analysis of the plan: the median over the edits of 50 random tasks, each between a
        person and a device in turn."""
        document = synthetic_study(tasks=1000, links=3000, events=20, plans=4, seed=seed)
        study = load_study(document).study
        graph = prepare(study)
        plan = study.plans[1].id
        for collect, label in ((False, "gc paused"), (True, "gc running")):
            analysis_s = _median_seconds(
                lambda: analyse_plan(study, plan, graph=graph), repeats, collect
            )
            evaluation = PlanEvaluation(study, plan, graph)
            rng = random.Random(seed)
            leaves = [task.id for task in study.leaves]
            turn = iter(range(10**6))

            def edit(evaluation=evaluation, rng=rng, leaves=leaves, turn=turn) -> None:
                evaluation.reassign(rng.choice(leaves), CHOICES[next(turn) % 2])
                evaluation.headline()

            edit_s = _median_seconds(edit, 50, collect)
            ratio = edit_s / analysis_s
            self.stdout.write(
                f"{label:10}  one incremental edit of {plan} {edit_s * 1000:6.2f} ms, one full "
                f"analysis {analysis_s * 1000:6.1f} ms: edit / analysis {ratio:6.4f} (target "
                f"<= {EDIT_LIMIT:g}: {'met' if ratio <= EDIT_LIMIT else 'MISSED'})"
            )

    def memory(self, *, seed: int, tasks: int) -> None:
        """The peak resident memory of analysing one plan (with a mode map) of a study of
        ``tasks`` tasks, in a forked process, the study already read."""
        document = synthetic_study(tasks=tasks, links=3 * tasks, events=20, plans=2, seed=seed)
        study = _read_unchecked(document)
        plan = study.plans[1].id

        def work() -> bytes:
            analysis = analyse_plan(study, plan)
            return b"x" * len(analysis.handovers)

        started = time.perf_counter()
        before, peak, handovers = _peak_memory(work)
        seconds = time.perf_counter() - started
        verdict = "met" if peak <= MEMORY_LIMIT_MB else "MISSED"
        target = f"; target <= {MEMORY_LIMIT_MB} MB: {verdict}" if tasks == MEMORY_TASKS else ""
        self.stdout.write(
            f"analysis of {plan} of a {tasks:,}-task study ({handovers:,} handovers): "
            f"{seconds:.1f} s, peak {peak:.0f} MB ({peak - before:.0f} MB for the analysis"
            f"{target})"
        )

    def chains(self) -> None:
        """Chain analysis at its limit (``CHAIN_ENTRIES_MAX``): a long chain whose tasks
        each have their own schedule, just under the limit (analysed), at 1,000 tasks
        (refused by the study checks) and at 30,000 tasks (refused for its size)."""
        self.stdout.write("Chains at the limit of task-in-chain entries")
        under = 1
        while (under + 1) * (under + 2) // 2 <= CHAIN_ENTRIES_MAX:
            under += 1
        cases = (
            (under, "checked and analysed"),
            (1_000, "checked (refused: too many entries)"),
            (30_000, "checked (refused: too many tasks)"),
        )
        for tasks, what in cases:
            text = json.dumps(long_chain_study(tasks), separators=(",", ":"))

            def work(text=text) -> bytes:
                result = load_study_text(text)
                if result.ok:
                    analysis = analyse_plan(result.study, "P")
                    return b"x" * sum(len(chain.tasks) for chain in analysis.chains)
                return b"-" * len(result.errors)

            started = time.perf_counter()
            before, peak, size = _peak_memory(work)
            seconds = time.perf_counter() - started
            self.stdout.write(
                f"  {tasks:>6} tasks ({tasks * (tasks + 1) // 2:,} entries), {what}: "
                f"{seconds:.1f} s, peak {peak:.0f} MB ({peak - before:.0f} MB for the work)"
            )

    def snapshots(self, *, repeats: int, seed: int) -> None:
        """Verifying a snapshot (re-hash, re-read, re-write canonically) of the largest
        example study and of the 1,000-task study, in each canonical form."""
        largest = max(example_paths(), key=lambda path: path.stat().st_size)
        studies = [
            (largest.name, load_study(json.loads(largest.read_text(encoding="utf-8"))).study),
            (
                "1,000-task study",
                load_study(
                    synthetic_study(tasks=1000, links=3000, events=20, plans=4, seed=seed)
                ).study,
            ),
        ]
        self.stdout.write("snapshot verification (hash, read back, write canonically)")
        for name, study in studies:
            document = study_to_json(study)
            cells = []
            for form in (BATON_1, CURRENT_FORM):
                text = canonical_json(document, form)
                sha256 = digest(text)
                seconds = _median_seconds(
                    lambda text=text, sha256=sha256, form=form: verify(text, sha256, form),
                    repeats,
                    True,
                )
                cells.append(f"{form} {seconds * 1000:7.1f} ms")
            size = len(text.encode("utf-8")) / 1024
            self.stdout.write(f"    {name:28} {size:7.0f} KiB   " + "   ".join(cells))

    def simulation(self, *, repeats: int, seed: int) -> None:
        """1,000 simulated days of the 1,000-task study against one analysis of it."""
        document = synthetic_study(tasks=1000, links=3000, events=20, plans=4, seed=seed)
        study = load_study(document).study
        graph = prepare(study)
        plan = study.plans[1].id
        analysis_s = _median_seconds(
            lambda: analyse_plan(study, plan, graph=graph), repeats, collect=True
        )
        start = time.perf_counter()
        run = simulate(study, plan, days=SIMULATION_DAYS, seed=seed)
        simulation_s = time.perf_counter() - start
        ratio = simulation_s / analysis_s
        occurrences = sum(run.figures[h]["interactions"].sum() for h in run.humans)
        self.stdout.write(
            f"day simulation of {plan}: {SIMULATION_DAYS:,} days in {simulation_s:.2f} s "
            f"({simulation_s / SIMULATION_DAYS * 1000:.2f} ms a day, "
            f"{FIGURES['interactions_per_day'].label.lower()} "
            f"{figure_text('interactions_per_day', occurrences / SIMULATION_DAYS)}); one analysis "
            f"{analysis_s * 1000:.1f} ms"
        )
        self.stdout.write(
            f"            a simulated day / an analysis {ratio / SIMULATION_DAYS:6.4f};  "
            f"{SIMULATION_DAYS:,} days / an analysis {ratio:6.1f} (target <= "
            f"{SIMULATION_LIMIT:g}: {'met' if ratio <= SIMULATION_LIMIT else 'MISSED'})"
        )

    def export(self, *, repeats: int, seed: int) -> None:
        """The printable report (HTML and PDF) of the insulin example's largest plan (the
        most handovers and findings) and of a 1,000-task study: the median time, and the
        peak resident memory of a forked process that renders the PDF once (the imports
        a first render makes included)."""
        import json
        from datetime import UTC, datetime
        from importlib import resources

        from allocation.exports import ExportSource
        from allocation.exports.report import report_html, report_pdf

        def source(document: dict, plan: str | None) -> ExportSource:
            study = load_study(document).study
            if plan is None:
                analyses = [analyse_plan(study, p.id) for p in study.plans]
                analysis = max(analyses, key=lambda a: len(a.handovers) + len(a.findings))
            else:
                analysis = analyse_plan(study, plan)
            return ExportSource(
                analysis=analysis,
                document=document,
                snapshot=None,
                exported=datetime(2025, 3, 1, tzinfo=UTC),
            )

        example = resources.files("allocation.examples") / "closed-loop-insulin.json"
        synthetic = synthetic_study(tasks=1000, links=3000, events=20, plans=4, seed=seed)
        cases = [
            ("insulin example", source(json.loads(example.read_text("utf-8")), None)),
            ("1,000-task study", source(synthetic, synthetic["plans"][1]["id"])),
        ]
        # Memory first, while this process has rendered nothing yet: a fork reuses the
        # heap its parent freed, which would hide what a render needs.
        memory = [_peak_memory(lambda case=case: report_pdf(case)) for _label, case in cases]
        for (label, case), (before, peak, pages) in zip(cases, memory, strict=True):
            analysis = case.analysis
            html_s = _median_seconds(lambda case=case: report_html(case), repeats, True)
            pdf_s = _median_seconds(lambda case=case: report_pdf(case), repeats, True)
            self.stdout.write(
                f"report of {label}, plan {analysis.plan.id} ({len(analysis.study.leaves)} "
                f"tasks, {len(analysis.handovers)} handovers, {len(analysis.findings)} "
                f"findings): HTML {html_s * 1000:.0f} ms, PDF {pdf_s * 1000:.0f} ms "
                f"({pages:,} bytes); peak RSS {peak:.0f} MB ({peak - before:.0f} MB above "
                f"the process before the render)"
            )

    def pages(self, *, repeats: int, seed: int) -> None:
        """Plan editor timings on the 1,000-task study, in a throw-away test database."""
        from django.test import Client
        from django.urls import reverse

        from allocation import selectors, services

        with _throwaway_database():
            from django.contrib.auth import get_user_model

            user = get_user_model().objects.create_user("bench-runner")
            document = synthetic_study(tasks=1000, links=3000, events=20, plans=4, seed=seed)
            study = services.study_import(data=document, owner=user)
            client = Client()
            client.force_login(user)
            plan = document["plans"][1]["id"]
            task = next(t["id"] for t in document["tasks"] if "parent" in t)
            trivial_url = reverse("study-list")
            editor_url = reverse("plan-editor", args=[study.pk, plan])
            row_url = reverse("plan-row-save", args=[study.pk, plan, task])
            choices = [
                {"who": "person", "human": "person"},
                {"who": "device", "automation": "device-0"},
            ]
            turn = iter(range(10**6))

            def trivial():
                client.get(trivial_url)

            def editor_cold():
                selectors.study_cache_clear()
                client.get(editor_url)

            def editor_warm():
                client.get(editor_url)

            def row_save():
                client.post(row_url, choices[next(turn) % 2], headers={"HX-Request": "true"})

            rows = [
                ("open the plan editor (study read from the rows)", editor_cold, False),
                ("open the plan editor again (study already read)", editor_warm, True),
                ("save one row (check it, write, update the analysis)", row_save, True),
            ]
            for collect, mode in ((False, "gc paused"), (True, "gc running")):
                trivial_s = _median_seconds(trivial, repeats * 4, collect)
                self.stdout.write(
                    f"pages on the 1,000-task study, {mode}: trivial page (the study list) "
                    f"{trivial_s * 1000:.1f} ms"
                )
                for label, work, targeted in rows:
                    seconds = _median_seconds(work, repeats, collect)
                    ratio = seconds / trivial_s
                    verdict = "met" if ratio <= PAGE_LIMIT else "MISSED"
                    target = f" (target <= {PAGE_LIMIT:g}: {verdict})" if targeted else ""
                    self.stdout.write(
                        f"    {label:52} {seconds * 1000:8.1f} ms  {ratio:6.1f}x trivial{target}"
                    )

    def mode_check_at_limit(self, *, repeats: int) -> None:
        """The mode-map check of a map of 23 look-alike modes whose random actions give
        the person 1,357 beliefs, with 55 changes without a cue bringing its steps just
        under MODE_STEPS_MAX (the map of the mode-limit tests)."""
        from importlib import resources

        from allocation.core.analysis.modecheck import mode_search_size

        document = json.loads(
            (resources.files("allocation.examples") / "home-heating.json").read_text("utf-8")
        )
        plan = document["plans"][0]
        leaves = list(plan["assignments"])
        rng = random.Random(3)
        count, moves = 23, []
        for i in range(count):
            for k in range(2):
                target = f"m{rng.randrange(count)}"
                moves.append(
                    {"from": f"m{i}", "to": target, "trigger": f"press {k}", "by": "human"}
                    | {"cue": "display"}
                )
            target = f"m{rng.randrange(count)}"
            moves.append(
                {"from": f"m{i}", "to": target, "trigger": f"drift {i}", "by": "automation"}
                | {"cue": "display"}
            )
        moves += [
            {"from": f"m{k % count}", "to": f"m{(k * 7 + 3) % count}", "trigger": f"idle {k}"}
            | {"by": "automation", "cue": "none"}
            for k in range(55)
        ]
        plan["modes"] = {
            "initial": "m0",
            "states": [
                {"id": f"m{i}", "name": f"Mode {i}", "indication": "lamp"}
                | (
                    {"overrides": {leaves[i % len(leaves)]: {"automation": "thermostat"}}}
                    if i % 3 == 0
                    else {}
                )
                for i in range(count)
            ],
            "transitions": moves,
        }
        study = load_study(document).require_valid()
        chosen = study.plans[0]
        size = mode_search_size(chosen.modes)
        assumptions = resolve_assumptions(study.assumptions)
        seconds = _median_seconds(
            lambda: verify_mode_map(study, chosen, assumptions), max(1, repeats), True
        )
        self.stdout.write(
            f"mode-map check at the limit ({size.modes} modes, {size.beliefs:,} beliefs, "
            f"{size.states:,} states, {size.steps:,} steps of {MODE_STEPS_MAX:,}): "
            f"{seconds:.2f} s"
        )

    def pending_imports(self, *, repeats: int) -> None:
        """A trivial page of a user with eleven spreadsheets of 1.9 MB uploaded (one per
        study) and not applied: its time, and the size of the user's session row."""
        from django.contrib.sessions.models import Session
        from django.test import Client
        from django.urls import reverse

        from allocation import services

        with _throwaway_database():
            from django.contrib.auth import get_user_model

            user = get_user_model().objects.create_user("bench-importer")
            client = Client()
            client.force_login(user)
            trivial_url = reverse("study-list")

            def trivial():
                client.get(trivial_url)

            def session_bytes() -> int:
                key = client.session.session_key
                return len(Session.objects.get(session_key=key).session_data)

            before_s = _median_seconds(trivial, repeats * 4, True)
            before_b = session_bytes()
            # 1.9 MB that does not compress, as an XLSX (a zip archive) does not; kept as
            # uploaded, it is read only for a preview.
            data = random.Random(1).randbytes(1_900_000)
            uploads: list[float] = []
            for index in range(11):
                document = synthetic_study(tasks=5, links=4, events=1, plans=1, seed=index)
                document["study"]["id"] = f"bench-import-{index}"
                study = services.study_import(data=document, owner=user)
                plan = document["plans"][0]["id"]
                url = reverse("plan-import-upload", args=[study.pk, plan])
                file = io.BytesIO(data)
                file.name = f"plan-{index}.xlsx"
                start = time.perf_counter()
                client.post(url, {"file": file})
                uploads.append(time.perf_counter() - start)
            after_s = _median_seconds(trivial, repeats * 4, True)
            after_b = session_bytes()
            self.stdout.write(
                f"a user with 11 spreadsheets of {len(data) / 1e6:.1f} MB uploaded, not "
                f"applied: trivial page {before_s * 1000:.1f} ms before, "
                f"{after_s * 1000:.1f} ms after; session row {before_b:,} bytes before, "
                f"{after_b:,} bytes after; an upload {statistics.median(uploads) * 1000:.0f} ms "
                f"(median), the last {uploads[-1] * 1000:.0f} ms"
            )

    def pages_at_limit(self, *, seed: int) -> None:
        """The pages of a study at the size limits (``STUDY_MAX_TASKS`` tasks,
        ``STUDY_MAX_LINKS`` links, as many plans as ``STUDY_MAX_PLAN_TASKS`` allows), in
        a throw-away test database: each page read cold (the study read from its rows and
        analysed afresh, as on a new server process) and warm, its size, and the peak
        resident memory of a forked process that reads it cold."""
        from django.test import Client
        from django.urls import reverse

        from allocation import selectors, services

        plans = max(1, STUDY_MAX_PLAN_TASKS // STUDY_MAX_TASKS)
        with _throwaway_database():
            from django.contrib.auth import get_user_model

            user = get_user_model().objects.create_user("bench-limits")
            document = synthetic_study(
                tasks=STUDY_MAX_TASKS, links=STUDY_MAX_LINKS, events=20, plans=plans, seed=seed
            )
            started = time.perf_counter()
            study = services.study_import(data=document, owner=user)
            imported_s = time.perf_counter() - started
            client = Client()
            client.force_login(user)
            plan = document["plans"][1 if plans > 1 else 0]["id"]
            editor = reverse("plan-editor", args=[study.pk, plan])
            pages = [
                ("study page", reverse("study-detail", args=[study.pk])),
                ("plan editor, first page", editor),
                ("plan editor, every goal, page 40", f"{editor}?goal=all&page=40"),
                ("inventory", reverse("study-inventory", args=[study.pk])),
                ("dashboard", reverse("plan-dashboard", args=[study.pk, plan])),
                ("review", reverse("plan-review", args=[study.pk, plan])),
            ]
            self.stdout.write(
                f"Pages of a study at the limits: {STUDY_MAX_TASKS:,} tasks, "
                f"{len(document['links']):,} links, {plans} plans (imported in "
                f"{imported_s:.1f} s)"
            )
            for label, url in pages:

                def cold(url=url) -> bytes:
                    selectors.study_cache_clear()
                    return client.get(url).content

                started = time.perf_counter()
                size = len(cold())
                cold_s = time.perf_counter() - started
                started = time.perf_counter()
                client.get(url)
                warm_s = time.perf_counter() - started
                before, peak, _size = _peak_memory(cold)
                self.stdout.write(
                    f"    {label:34} cold {cold_s:6.2f} s  warm {warm_s:6.2f} s  "
                    f"{size / 1e6:6.3f} MB  peak RSS {peak:.0f} MB ({peak - before:.0f} MB "
                    "above the process before the page)"
                )
