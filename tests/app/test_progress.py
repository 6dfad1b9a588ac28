"""The progress line on a terminal (common practice: a count, a bar and the time left, redrawn in place)."""

import io

from cladewright.distances import distance_matrix
from cladewright.progress import Progress

from simulate import make_alignment


class Terminal(io.StringIO):
    def isatty(self):
        return True


def test_time_left_follows_the_rate_so_far(monkeypatch):
    clock = iter([0.0, 10.0, 10.0])
    monkeypatch.setattr("cladewright.progress.time.monotonic", lambda: next(clock))
    bar = Progress("bootstrap", 4, stream=Terminal())
    bar.done = 1
    # one item in 10 s, three left: 30 s (arithmetic)
    assert bar.eta_seconds() == 30.0


def test_nothing_is_drawn_off_a_terminal():
    stream = io.StringIO()
    with Progress("bootstrap", 3, stream=stream) as bar:
        bar.advance(3)
    assert stream.getvalue() == ""


def test_distances_count_every_pair(monkeypatch):
    # n sequences have n (n - 1) / 2 pairs (arithmetic): 7 give 21.
    term = Terminal()
    monkeypatch.setattr("sys.stderr", term)
    names = [f"t{i}" for i in range(7)]
    aln = make_alignment(names, ["ACGTACGTAA", "ACGTACGTAC", "ACGAACGTAC", "ACGTTCGTAC", "TCGTACGTAC",
                                 "ACCTACGTAC", "ACGTACGGAC"])
    distance_matrix(aln, "k2p", progress=True)
    last = term.getvalue().rstrip("\n").split("\r")[-1]
    assert last.startswith("distances 21/21 ") and "100%" in last
