"""Execution helpers: the progress bar."""

import io

from sweep.execute import Progress


def test_progress_reports_count_rate_and_eta():
    buf = io.StringIO()
    bar = Progress(10, True, buf)
    bar.update(10)
    bar.close()
    assert "10/10" in buf.getvalue() and "samples/s" in buf.getvalue()
    assert "ETA 0 s" in buf.getvalue()
