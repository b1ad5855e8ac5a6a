"""Runs corpus cases one after another in this process: ``python hostile_driver.py CASES.json RESULTS.jsonl``.

Started by ``test_hostile_corpus.py`` in a child process with an address-space limit. Each case runs
``app.cli.main(argv)`` with its output captured and an alarm as its deadline; one JSON line per case
is written (and flushed) before and after it, so a case that kills the process is named.
"""
from __future__ import annotations

import contextlib
import io
import json
import os
import signal
import sys
import time
import traceback


class _Deadline(BaseException):
    pass


def _alarm(signum, frame):
    raise _Deadline()


def main() -> int:
    cases = json.loads(open(sys.argv[1], encoding="utf-8").read())
    per_case = float(sys.argv[3]) if len(sys.argv) > 3 else 30.0
    sys.path.insert(0, os.getcwd())
    from app.cli import main as cli_main
    signal.signal(signal.SIGALRM, _alarm)
    with open(sys.argv[2], "a", encoding="utf-8") as log:
        for case in cases:
            log.write(json.dumps({"start": case["name"]}) + "\n")
            log.flush()
            out, err = io.StringIO(), io.StringIO()
            t0 = time.perf_counter()
            rc, escaped = None, None
            os.chdir(case["cwd"])
            signal.setitimer(signal.ITIMER_REAL, per_case)
            try:
                with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
                    rc = cli_main(case["argv"])
            except _Deadline:
                escaped = "hang: no answer within the case's deadline"
            except SystemExit as exc:            # argparse refusals exit with status 2
                rc = exc.code if isinstance(exc.code, int) else 1
            except BaseException as exc:       # a traceback the user would have seen
                escaped = "".join(traceback.format_exception_only(type(exc), exc)).strip()[-400:]
            finally:
                signal.setitimer(signal.ITIMER_REAL, 0)
            text = err.getvalue()
            lines = [line for line in text.splitlines() if line.strip()]
            log.write(json.dumps({"name": case["name"], "rc": rc, "escaped": escaped, "stderr_tail": lines[-3:],
                                  "traceback": "Traceback (most recent call last)" in text,
                                  "seconds": round(time.perf_counter() - t0, 3)}) + "\n")
            log.flush()
    return 0


if __name__ == "__main__":
    sys.exit(main())
