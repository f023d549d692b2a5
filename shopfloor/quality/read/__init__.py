"""The quality app's read models: what the pages and exports show. They only read (no
transaction, no save, no audit entry); each goes through the reader's scope
(shopfloor.access).

- `board`: every work center's queue, WIP age, queue-time and due-date risk.
- `history`: a lot's full history (timeline) and its JSON form; the traceability claim.
- `genealogy`: a job's lots and panels, a panel's lot and jobs, a material lot's recall.
- `search`: the lot search and the quality overview (open holds, NCRs, alerts).
- `spc_series`: the SPC pages' series list and one series' chart data.
- `charts`: the SVG drawing of control charts (readings and bath analyses).
- `exports`: CSV and PDF exports of a lot's records.

The writes are in `shopfloor.quality.services`.
"""
