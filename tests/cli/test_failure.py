"""How a guarded command ends when a signal arrives (compose.cli.failure): the shell's convention,
128 + the signal's number (POSIX shell, "Exit Status": 130 for SIGINT, 143 for SIGTERM), even when
the exception the signal raised was turned into another one on its way out -- a C extension
importing at that moment reports ImportError "initialization failed" instead."""
from __future__ import annotations

import os
import signal
import time

import pytest

from compose.cli.failure import guarded


def _command(signum: int):
    @guarded
    def command():
        try:
            os.kill(os.getpid(), signum)
            time.sleep(5)           # the handler raises in the main thread before this ends
        except BaseException as exc:  # what a library's start-up does with it
            raise ImportError("initialization failed") from exc
    return command


@pytest.mark.parametrize("signum,code,word", [(signal.SIGTERM, 143, "terminated"),
                                              (signal.SIGINT, 130, "interrupted")])
def test_a_signal_turned_into_another_error_still_ends_as_the_signal(capsys, signum, code, word):
    with pytest.raises(SystemExit) as ended:
        _command(signum)()
    assert ended.value.code == code
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and word in err and "fault" not in err


def test_an_error_without_a_signal_is_still_a_fault(capsys):
    @guarded
    def command():
        raise ImportError("initialization failed")
    with pytest.raises(SystemExit) as ended:
        command()
    assert ended.value.code == 3 and "fault in compose" in capsys.readouterr().err


def test_the_handlers_are_put_back():
    before = (signal.getsignal(signal.SIGINT), signal.getsignal(signal.SIGTERM))
    with pytest.raises(SystemExit):
        _command(signal.SIGTERM)()
    assert (signal.getsignal(signal.SIGINT), signal.getsignal(signal.SIGTERM)) == before
