-- Per node: rows and frames lost just before them (from the gaps in the
-- node's sequence numbers), over the three tables.
SELECT node_id, COUNT(*) AS rows_seen, SUM(lost_before) AS lost_before
FROM (
  SELECT node_id, lost_before FROM reports
  UNION ALL SELECT node_id, lost_before FROM events
  UNION ALL SELECT node_id, lost_before FROM loads
) AS everything
GROUP BY node_id
ORDER BY node_id
