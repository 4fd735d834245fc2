"""iqaudit from Python: the library's analysis of recorded baseband IQ captures.

Every function calls the Rust library that the ``iqaudit`` command line uses;
nothing is re-implemented here. See docs/python.md in the repository.

    analyse(capture, profile=None, **options) -> Report
    info(capture, profile=None, **options)    -> dict   (iqaudit info --json)
    synth(profile, out, **options)            -> (capture_path, truth dict)
    recheck(report_path, **options)           -> dict   (iqaudit recheck --json)
    profile_new(**options)                    -> dict   (iqaudit profile new)
    profile_check(path)                       -> dict   (iqaudit profile check)

Errors raise IqauditError (message: the command line's one-line message;
``exit_code``: the command line's exit code for it).
"""

from ._iqaudit import (
    Burst,
    IqauditError,
    Report,
    __version__,
    analyse,
    info,
    profile_check,
    profile_new,
    recheck,
    synth,
)

analyze = analyse

__all__ = [
    "Burst",
    "IqauditError",
    "Report",
    "__version__",
    "analyse",
    "analyze",
    "info",
    "profile_check",
    "profile_new",
    "recheck",
    "synth",
]
