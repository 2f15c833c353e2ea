"""compose.timeline: stages recorded only when asked, on one clock across forked processes."""
import os

from compose import timeline


def test_nothing_is_recorded_without_the_variable(tmp_path, monkeypatch):
    monkeypatch.delenv("COMPOSE_TIMELINE", raising=False)
    with timeline.span("walk"):
        pass
    assert not timeline.enabled()
    assert list(tmp_path.iterdir()) == []


def test_spans_of_a_forked_process_land_in_the_same_file(tmp_path, monkeypatch):
    log = tmp_path / "t.txt"
    monkeypatch.setenv("COMPOSE_TIMELINE", str(log))
    with timeline.span("outer stage"):
        pid = os.fork()
        if pid == 0:                       # the child records its own stage and ends
            with timeline.span("child stage"):
                pass
            os._exit(0)
        os.waitpid(pid, 0)
    rows = timeline.read(str(log))
    assert [r[4] for r in rows] == ["outer stage", "child stage"]      # by start
    (p0, t0, s0, e0, _, c0), (p1, t1, s1, e1, _, c1) = rows
    assert p0 == os.getpid() and p1 == pid and t0 == "MainThread"
    assert s0 <= s1 <= e1 <= e0
    assert c0 >= 0 and c1 >= 0                     # the recording thread's CPU seconds
