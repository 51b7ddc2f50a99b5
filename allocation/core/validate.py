"""Check study files from the command line: ``python -m allocation.core.validate FILE…``.

Prints every error and warning with its JSON path; exits 1 when any file has errors.
"""

from __future__ import annotations

import sys
from pathlib import Path

from .fileformat import load_study_text
from .limits import STUDY_FILE_MAX_BYTES

__all__ = ["main"]


def main(argv: list[str] | None = None) -> int:
    paths = sys.argv[1:] if argv is None else argv
    if not paths or paths[0] in ("-h", "--help"):
        print("usage: python -m allocation.core.validate FILE [FILE ...]", file=sys.stderr)
        return 2
    failed = False
    for name in paths:
        path = Path(name)
        if not path.is_file():
            print(f"{name}: no such file", file=sys.stderr)
            failed = True
            continue
        size = path.stat().st_size
        if size > STUDY_FILE_MAX_BYTES:
            # The same limit as an upload: the file is not read.
            print(
                f"{name}: {size:,} bytes, over the {STUDY_FILE_MAX_BYTES:,} a study file may "
                "have (limit STUDY_FILE_MAX_BYTES)",
                file=sys.stderr,
            )
            failed = True
            continue
        result = load_study_text(path.read_bytes())
        for problem in result.problems:
            print(f"{name}: {problem.level}: {problem}")
        failed = failed or not result.ok
        print(f"{name}: {len(result.errors)} error(s), {len(result.warnings)} warning(s)")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
