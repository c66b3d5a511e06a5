-- Per node: reports, energy drawn, delivered and stored (nJ, exact sums),
-- efficiency ((delivered + stored) / drawn, the report's rule before its
-- rounding down to whole ppm) and seconds in each converter state.
SELECT
  node_id,
  COUNT(*) AS reports,
  SUM(drawn_nj) AS drawn_nj,
  SUM(delivered_nj) AS delivered_nj,
  SUM(stored_nj) AS stored_nj,
  CASE WHEN SUM(drawn_nj) > 0
       THEN (SUM(delivered_nj) + SUM(stored_nj)) / CAST(SUM(drawn_nj) AS DOUBLE)
  END AS efficiency,
  SUM(idle_ms) / 1000.0 AS idle_s,
  SUM(cold_start_ms) / 1000.0 AS cold_start_s,
  SUM(harvesting_ms) / 1000.0 AS harvesting_s,
  SUM(sagging_ms) / 1000.0 AS sagging_s,
  SUM(cutoff_ms) / 1000.0 AS cutoff_s,
  SUM(stalled_ms) / 1000.0 AS stalled_s
FROM reports
GROUP BY node_id
ORDER BY node_id
