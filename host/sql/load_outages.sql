-- Per node: how often the load lost its supply, by cause.
SELECT node_id, cause, COUNT(*) AS outages
FROM loads
WHERE NOT powered
GROUP BY node_id, cause
ORDER BY node_id, cause
