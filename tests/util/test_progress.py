"""The tiny progress bar: draws only on a terminal and only when not quiet."""

import io

from wordspot.util.progress import ProgressBar


class FakeTerminal(io.StringIO):
    def isatty(self):
        return True


def test_draws_on_a_terminal_and_clears():
    out = FakeTerminal()
    with ProgressBar(4, "pass 1", stream=out, width=8) as bar:
        bar.update(2)
        assert out.getvalue().rsplit("\r", 1)[-1].startswith("pass 1 [####....] 2/4")
        bar.update(5)  # never past the end
        assert "[########] 4/4" in out.getvalue()
    assert out.getvalue().endswith("\r\033[K")


def test_silent_when_quiet_or_not_a_terminal():
    quiet = FakeTerminal()
    ProgressBar(3, "x", stream=quiet, quiet=True).update()
    assert quiet.getvalue() == ""
    pipe = io.StringIO()  # isatty() is False
    bar = ProgressBar(3, "x", stream=pipe)
    bar.update()
    bar.close()
    assert pipe.getvalue() == ""
