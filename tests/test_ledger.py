"""The ledger keeps the most severe status per entity and accounts for every key it was told about."""

from workbench.core.ledger import Ledger


def test_final_status_is_the_most_severe() -> None:
    ledger = Ledger()
    ledger.answer("a", "s.csv", 2, "ingest", "kept", "read", "read")
    ledger.answer("a", "s.csv", 2, "clean", "flagged", "non_answer", "non-answer")
    ledger.answer("a", "s.csv", 2, "identify", "kept", "detected", "de")
    ledger.answer("b", "s.csv", 3, "ingest", "kept", "read", "read")
    ledger.row("r1", "s.csv", 2, "ingest", "dropped", "bad_json", "line 2 is not JSON")
    assert ledger.final_status("answer") == {"a": "flagged", "b": "kept"}
    assert ledger.counts() == {"row": {"dropped": 1}, "answer": {"flagged": 1, "kept": 1}}
    assert ledger.reasons()["clean:non_answer"] == 1
    frame = ledger.frame()
    assert list(frame.columns) == ["level", "key", "source", "row", "stage", "status", "code", "message"]
    assert len(frame) == 5


def test_bulk_blocks_keep_order_and_truncate_by_event_count() -> None:
    ledger = Ledger()
    ledger.row("r1", "s", 1, "ingest", "kept", "read", "read")
    ledger.bulk("answer", ["a", "b", "c"], "s", [1, 1, 2], "ingest", "kept", "read", ["m1", "m2", "m3"])
    mark = ledger.mark()
    ledger.answer("b", "s", 1, "clean", "flagged", "non_answer", "non-answer")
    assert [e[1] for e in ledger.events] == ["r1", "a", "b", "c", "b"]
    assert ledger.final_status("answer") == {"a": "kept", "b": "flagged", "c": "kept"}
    earlier = ledger.truncated(mark)
    assert len(earlier) == 4 and earlier.final_status("answer")["b"] == "kept"
    assert ledger.reasons() == {"clean:non_answer": 1, "ingest:read": 4}
    assert ledger.accounted("answer") == {"a", "b", "c"}
