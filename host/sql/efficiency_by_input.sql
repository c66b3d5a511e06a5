-- Per node and 50 mV bin of the interval's mean input voltage: intervals
-- spent at least 90 % converting (harvesting or sagging) that drew energy;
-- their seconds, energy drawn and converted (delivered + stored), nJ.
SELECT
  node_id,
  CAST(FLOOR(input_uv_mean / 50000) AS BIGINT) AS bin,
  SUM(interval_ms) / 1000.0 AS seconds,
  SUM(drawn_nj) AS drawn_nj,
  SUM(delivered_nj + stored_nj) AS converted_nj
FROM reports
WHERE drawn_nj > 0
  AND (harvesting_ms + sagging_ms) * 10 >= interval_ms * 9
GROUP BY node_id, CAST(FLOOR(input_uv_mean / 50000) AS BIGINT)
ORDER BY node_id, bin
