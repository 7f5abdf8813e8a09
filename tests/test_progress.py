"""The one progress display (selfcon/output/progress.py) and its two users: `selfcon run`
(iterations of one solve) and `selfcon batch` (jobs of a study)."""
import io

from selfcon.output.progress import ProgressDisplay, progress_mode


class _Tty(io.StringIO):
    def isatty(self):
        return True


def test_mode_follows_quiet_and_the_terminal():
    assert progress_mode(True, _Tty()) == "off"
    assert progress_mode(False, _Tty()) == "rich"
    assert progress_mode(False, io.StringIO()) == "plain"


def test_plain_prints_the_lines_and_off_prints_nothing():
    out = io.StringIO()
    with ProgressDisplay("plain", stream=out) as d:
        d.update(0.5, "half", line="step 1")
        d.update(1.0, "all")                      # no line: nothing printed
        d.note("a note")
    assert out.getvalue().splitlines() == ["step 1", "a note"]
    silent = io.StringIO()
    with ProgressDisplay("off", stream=silent) as d:
        d.update(1.0, "x", line="step")
        d.note("note")
    assert silent.getvalue() == ""


def test_rich_bar_shows_notes_and_the_count():
    out = _Tty()
    d = ProgressDisplay("rich", counted=True, stream=out)
    assert not d.wants_lines
    d.start(4, "0 done")
    d.update(3, "3 done", line="never printed as a line")
    d.note("worker 2 restarted")
    d.stop()
    text = out.getvalue()
    assert "worker 2 restarted" in text and "3/4" in text
    assert "never printed as a line" not in text


def test_batch_progress_lines_count_finished_jobs():
    from selfcon.batch.runner import BatchProgress, format_counts
    out = io.StringIO()
    p = BatchProgress(False, stream=out)
    assert p.wants_lines
    p.start(3, {"done": 1, "queued": 2})
    p.event("job 2 done", {"done": 2, "queued": 1})
    p.stop()
    assert out.getvalue().splitlines() == ["batch: 3 jobs, 1 done, 2 queued", "[2/3] job 2 done"]
    assert format_counts({"failed": 1, "done": 4}) == "4 done, 1 failed"      # fixed order
    assert format_counts({}) == "nothing to do"
