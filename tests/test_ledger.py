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
