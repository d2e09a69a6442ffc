"""A run knows its data: fingerprints of what its model read, stored with the run and compared with the import.

Set-based in DuckDB (sql/queries/fingerprint_macros.sql holds the one definition): each parcel's md5 of its
segment, market area, class and feature values sits beside its estimate (`parcel_estimates.data_md5`), and each
segment's md5 of its qualified, time-adjusted sales and the analyst's decisions in `run_sales_fingerprints`.
`reval value` refuses a run whose data differ from the current import, naming what changed.
"""
from __future__ import annotations

from typing import Sequence

from reval.data.store import Store
from reval.errors import UserError
from reval.results import DataChanges, ParcelChanges, SegmentSalesChange


def record_fingerprints(store: Store, run_id: str, parcel_ids: Sequence[str] | None = None) -> None:
    """Store the current fingerprints of a run's parcels (all, or the given ones, e.g. after one parcel is
    revalued with the run's models) and, for all parcels, the run's sales fingerprints. Call inside the
    transaction that writes the estimates."""
    store.run("fingerprint_macros")
    store.run("run_record_fingerprints", {"run": run_id, "parcel_ids": None if parcel_ids is None else list(parcel_ids),
                                          "sales": parcel_ids is None})


def data_changes(store: Store, run_id: str) -> DataChanges:
    """How the current import differs from the data the run was fitted on (empty lists: no difference)."""
    store.run("fingerprint_macros")
    parcels: dict[str, ParcelChanges] = {
        str(r["change"]): {"n": int(r["n"]), "examples": [str(x) for x in r["examples"]]}
        for r in store.records("run_parcel_changes", {"run": run_id})}
    sales: list[SegmentSalesChange] = [{"segment": str(r["segment"]), "n_then": int(r["n_then"]), "n_now": int(r["n_now"])}
             for r in store.records("run_sales_changes", {"run": run_id})]
    return {"run_id": run_id, "parcels": parcels, "sales": sales}


def _listed(kind: str, found: ParcelChanges) -> str:
    more = ", ..." if found["n"] > len(found["examples"]) else ""
    return f"{found['n']:,} parcel(s) {kind} ({', '.join(found['examples'])}{more})"


def describe_changes(changes: DataChanges) -> str | None:
    """One sentence naming what changed since the run was fitted, or None when nothing did."""
    run, parcels, sales = changes["run_id"], changes["parcels"], changes["sales"]
    if "unknown" in parcels:
        return (f"Run {run} was made before reval recorded the data a run is fitted on, so it cannot be checked "
                "against the current import: run `reval fit` again.")
    parts = [_listed(kind, parcels[kind]) for kind in ("added", "removed", "changed") if kind in parcels]
    if sales:
        shown = "; ".join(f"{s['segment']}: {s['n_then']:,} qualified sales then, {s['n_now']:,} now"
                          for s in sales[:3])
        more = f"; {len(sales) - 3:,} more segment(s)" if len(sales) > 3 else ""
        parts.append(f"sales changed in {len(sales):,} segment(s) ({shown}{more})")
    if not parts:
        return None
    return (f"Run {run} was fitted on data that differ from the current import: {'; '.join(parts)}. "
            "Its values are not staged: run `reval fit` again (after `reval sales` if sales changed).")


def refuse_changed_data(store: Store, run_id: str) -> None:
    """Raise UserError naming what changed when the run was fitted on other data than the current import."""
    message = describe_changes(data_changes(store, run_id))
    if message is not None:
        raise UserError(message)
