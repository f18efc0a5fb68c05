"""The one progress helper: silent unless stderr is a terminal or progress is asked for, a
caller's own bar passed through, and nothing ever written to standard output."""
import io

from bayespool import progress
from bayespool.progress import SILENT, progress_bar


def test_silent_when_stderr_is_not_a_terminal(monkeypatch):
    monkeypatch.setattr(progress.sys, "stderr", io.StringIO())
    assert progress_bar(None, 10, desc="x", unit="step") is SILENT
    assert progress_bar(False, 10, desc="x", unit="step") is SILENT


def test_shown_on_stderr_when_asked(capsys):
    bar = progress_bar(True, 3, desc="counting", unit="step")
    bar.update(3)
    bar.close()
    out, err = capsys.readouterr()
    assert out == "" and "counting" in err


def test_a_callers_bar_is_used_as_it_is():
    class Bar:
        def update(self, n=1):
            pass
    mine = Bar()
    assert progress_bar(mine, 5, desc="x", unit="step") is mine
