-- Per node and day: 24 h blocks of node time from the start of the first
-- report interval; energy drawn, delivered and stored (nJ), seconds without
-- output (cutoff and stalled).
WITH placed AS (
  SELECT
    node_id,
    uptime_ms - interval_ms AS start_ms,
    MIN(uptime_ms - interval_ms) OVER (PARTITION BY node_id) AS first_ms,
    drawn_nj, delivered_nj, stored_nj, cutoff_ms, stalled_ms
  FROM reports
)
SELECT
  node_id,
  CAST(FLOOR((start_ms - first_ms) / 86400000.0) AS BIGINT) AS day,
  SUM(drawn_nj) AS drawn_nj,
  SUM(delivered_nj) AS delivered_nj,
  SUM(stored_nj) AS stored_nj,
  SUM(cutoff_ms + stalled_ms) / 1000.0 AS outage_s
FROM placed
GROUP BY node_id, CAST(FLOOR((start_ms - first_ms) / 86400000.0) AS BIGINT)
ORDER BY node_id, day
