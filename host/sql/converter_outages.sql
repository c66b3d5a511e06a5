-- Per node: converter outages (from a transition into cutoff or stalled
-- until the next transition out of both; one under way when the log starts
-- begins with the first report's interval, one still open at the end of the
-- log ends with the node's last message) with their count, total and
-- longest seconds (the longest is what storage must bridge). Events are in
-- node time order: sequence numbers wrap after 65,536 frames.
WITH first_boot AS (
  SELECT node_id, MIN(boot) AS boot FROM reports GROUP BY node_id
),
first_report AS (
  SELECT r.node_id, r.boot, MIN(r.uptime_ms) AS uptime_ms
  FROM reports AS r JOIN first_boot AS f ON r.node_id = f.node_id AND r.boot = f.boot
  GROUP BY r.node_id, r.boot
),
changes AS (
  SELECT node_id, boot, uptime_ms, seq, to_state AS state FROM events
  UNION ALL
  -- An outage already under way when the log starts begins with the
  -- interval of the first report.
  SELECT r.node_id, r.boot, r.uptime_ms - r.interval_ms, -1, r.state
  FROM reports AS r
  JOIN first_report AS f
    ON r.node_id = f.node_id AND r.boot = f.boot AND r.uptime_ms = f.uptime_ms
  WHERE r.state IN ('cutoff', 'stalled')
),
marked AS (
  SELECT
    node_id, boot, seq, uptime_ms,
    CASE WHEN state IN ('cutoff', 'stalled') THEN 1 ELSE 0 END AS down,
    LAG(CASE WHEN state IN ('cutoff', 'stalled') THEN 1 ELSE 0 END, 1, 0)
      OVER (PARTITION BY node_id ORDER BY boot, uptime_ms, seq) AS was_down
  FROM changes
),
edges AS (
  SELECT node_id, uptime_ms, down,
         LEAD(uptime_ms) OVER (PARTITION BY node_id ORDER BY boot, uptime_ms, seq) AS next_ms
  FROM marked
  WHERE down <> was_down
),
last_seen AS (
  SELECT node_id, MAX(uptime_ms) AS end_ms FROM (
    SELECT node_id, MAX(uptime_ms) AS uptime_ms FROM reports GROUP BY node_id
    UNION ALL SELECT node_id, MAX(uptime_ms) FROM events GROUP BY node_id
    UNION ALL SELECT node_id, MAX(uptime_ms) FROM loads GROUP BY node_id
  ) AS everything
  GROUP BY node_id
)
SELECT
  n.node_id,
  COUNT(e.uptime_ms) AS outages,
  COALESCE(SUM(COALESCE(e.next_ms, n.end_ms) - e.uptime_ms), 0) / 1000.0 AS outage_s,
  COALESCE(MAX(COALESCE(e.next_ms, n.end_ms) - e.uptime_ms), 0) / 1000.0 AS longest_outage_s
FROM last_seen AS n
LEFT JOIN edges AS e ON e.node_id = n.node_id AND e.down = 1
GROUP BY n.node_id
ORDER BY n.node_id
