"""The quality app's writes, one module per use (each public function is one use case).

- `alerts`: outbox events become alerts, holds and NCRs, exactly once (readings out of
  window, drift signals); `raise_alert` and `hold_for_review` for other apps (bath
  chemistry).
- `notifications`: an alert's e-mail and webhook, and the relay that re-sends what the
  broker lost.
- `deadlines`: queue-time limits (and a supervisor's release of a warning) and due dates.
- `limits`: an engineer's SPC controls (fixed or recomputed limits, run rules).
- `dispositions`: the review board's decision on an NCR.
- `queue`: a supervisor's order of the lots waiting at a work center.

The pages' read models are in `shopfloor.quality.read`.
"""
