import io

from pwsolid.progress import ProgressBar


def test_progress_bar_counts_and_fills():
    out = io.StringIO()
    bar = ProgressBar("scan", stream=out, width=10)
    bar(0, 4)
    bar(2, 4, "point 2")
    bar(4, 4)
    lines = out.getvalue().splitlines()
    assert len(lines) == 3
    assert "[.....-----]" not in lines[1] and "[#####.....] 2/4" in lines[1]
    assert "[##########] 4/4" in lines[2] and "point 2" in lines[1]
