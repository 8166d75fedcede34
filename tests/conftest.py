"""Fixtures shared by the test modules."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from forebrief.cli import main

Run = Callable[..., tuple[int, str, str]]


@pytest.fixture
def run(capsys: pytest.CaptureFixture[str]) -> Run:
    """Call the command line's ``main(argv)``; return (exit code, stdout, stderr).

    Usage errors exit through argparse's SystemExit, whose code is returned. Modules that need
    another kind of ``run`` define their own fixture of that name.
    """

    def call(*args: object) -> tuple[int, str, str]:
        # run(["score", ...]) or run("score", ...): a list, or the arguments one by one
        first = args[0] if len(args) == 1 else None
        argv = first if isinstance(first, list | tuple) else args
        try:
            code = main([str(a) for a in argv])
        except SystemExit as exc:
            code = int(exc.code) if exc.code is not None else 0
        out, err = capsys.readouterr()
        return code, out, err

    return call
