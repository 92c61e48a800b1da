"""The living worksheet, seen by an independent client: re-running a `given` updates the
result blocks of the cells that depend on it, through `update_display_data`.

Expected numbers by hand: p = iload · 5 V; at 180 mA ± 20 % that is 900 mW (720 mW … 1.08 W),
whose worst case passes `p <= 1.2 W` by +120 mW; at 250 mA it is 1.25 W and the check fails
by −50 mW."""

from __future__ import annotations

from conftest import TIMEOUT
from test_client_scripts import collect_outputs

RESULTS = "application/vnd.headroom.results+json"


def execute_cell(kc, code: str, cell_id: str) -> tuple[str, list[dict]]:
    msg = kc.session.msg(
        "execute_request",
        {"code": code, "silent": False, "store_history": True, "user_expressions": {},
         "allow_stdin": False, "stop_on_error": True},
        metadata={"cellId": cell_id},
    )
    kc.shell_channel.send(msg)
    msg_id = msg["header"]["msg_id"]
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["parent_header"]["msg_id"] == msg_id
    assert reply["content"]["status"] == "ok", reply["content"]
    return msg_id, collect_outputs(kc, msg_id)


def block_of(outputs: list[dict]) -> dict:
    blocks = [m for m in outputs if m["msg_type"] == "display_data" and RESULTS in m["content"]["data"]]
    assert len(blocks) == 1, outputs
    return blocks[0]


def test_a_changed_given_updates_the_other_cells_blocks(kernel):
    _, kc = kernel
    _, given = execute_cell(kc, "given iload = 180 mA ± 20 %", "cell-given")
    _, derived = execute_cell(kc, "p = iload * 5 V", "cell-derived")
    _, check = execute_cell(kc, "check p <= 1.2 W", "cell-check")
    derived_id = block_of(derived)["content"]["transient"]["display_id"]
    check_id = block_of(check)["content"]["transient"]["display_id"]
    assert derived_id != check_id
    first = block_of(check)["content"]["data"][RESULTS]["checks"][0]
    assert first["passed"] is True
    assert abs(first["margin"] - 0.120) < 1e-9

    _, rerun = execute_cell(kc, "given iload = 250 mA", "cell-given")
    updates = {m["content"]["transient"]["display_id"]: m["content"]["data"]
               for m in rerun if m["msg_type"] == "update_display_data"}
    assert set(updates) >= {derived_id, check_id}, list(updates)

    p = next(v for v in updates[derived_id][RESULTS]["values"] if v["name"] == "p")
    assert abs(p["si"] - 1.25) < 1e-12
    assert "min" not in p  # the new given has no tolerance
    assert "iload 180 mA (144 mA … 216 mA) → 250 mA" in updates[derived_id]["text/plain"]

    flipped = updates[check_id][RESULTS]["checks"][0]
    assert flipped["passed"] is False
    assert abs(flipped["margin"] + 0.050) < 1e-9

    # The cell that was run says which cells it updated.
    own = block_of(rerun)["content"]["data"]["text/plain"]
    assert "updated 2 other cells" in own, own
