"""The analyst's decision on one sale: exclude it from models and ratio studies, or include it at full weight.

A decision is stored per sale id (sale_decisions, newest wins, kept across re-imports), recorded as an audit event,
and the sales are re-qualified in the same transaction, so the next fit honours it: an excluded sale fails
qualification with the reason "excluded by analyst: ...", an included one is qualified (if the [sales] rules keep
it) and keeps weight 1 under the robust loss (reval/model/robust.py). Including a sale lifts an earlier exclusion; it
does not override the [sales] rules.
"""
from __future__ import annotations

from reval.clock import utc_now
from reval.data.config import Config
from reval.data.events import current_user, record_event
from reval.data.sales import prepare_sales
from reval.data.store import Store
from reval.errors import UserError
from reval.results import SaleDecision
from reval.states import SaleChoice


def decide_sale(store: Store, config: Config, sale_id: str, decision: SaleChoice, reason: str) -> SaleDecision:
    """Store the analyst's decision on `sale_id` with a reason, log it and re-qualify the sales (all or nothing)."""
    sale_id, reason = sale_id.strip(), reason.strip()
    if decision not in ("exclude", "include"):
        raise UserError(f"A sale can be excluded or included, not {decision!r}.")
    if not reason:
        raise UserError("Give the reason for the decision with --reason; it is kept in the audit log.")
    parcels = store.records("sale_lookup", [sale_id])
    if not parcels:
        raise UserError(f"No sale with id {sale_id!r} in the imported sales.")
    prepared = any(p["qualified"] is not None for p in parcels)
    with store.transaction() as con:
        store.run("sale_decide", [sale_id, decision, reason, utc_now(), current_user()])
        record_event(con, f"sale_{decision}", {"sale_id": sale_id, "note": reason,
                                               "parcels": [p["parcel_id"] for p in parcels]},
                     segment=parcels[0]["segment"])
        if prepared:
            prepare_sales(store, config)
        after = store.records("sale_lookup", [sale_id])
        if prepared and decision == "include" and not after[0]["qualified"]:
            raise UserError(f"Sale {sale_id} stays excluded by the [sales] rules ({after[0]['qualification']}); "
                            "including a sale lifts an analyst's exclusion and keeps it at full weight, it does not "
                            "override the rules. Nothing was changed.")
    return {"sale_id": sale_id, "decision": decision, "reason": reason,
            "parcels": [p["parcel_id"] for p in after], "segment": after[0]["segment"],
            "qualified": bool(after[0]["qualified"]) if prepared else None,
            "qualification": after[0]["qualification"] if prepared else None}
