-- Per node: what storage and duty-cycle sizing start from. While the load
-- was supplied (intervals with no cutoff or stalled time and an output
-- voltage): its mean power, and its lowest (asleep) and highest (active)
-- power from the output current's extremes at the interval's mean voltage;
-- over all intervals, the highest mean output voltage. Watts and volts.
SELECT
  node_id,
  CASE WHEN SUM(CASE WHEN supplied THEN interval_ms ELSE 0 END) > 0
       THEN SUM(CASE WHEN supplied THEN delivered_nj ELSE 0 END) / 1e9
            / (SUM(CASE WHEN supplied THEN interval_ms ELSE 0 END) / 1e3)
       ELSE 0.0
  END AS load_w,
  MIN(CASE WHEN supplied AND output_na_min > 0
           THEN CAST(output_uv_mean AS DOUBLE) / 1e6 * (CAST(output_na_min AS DOUBLE) / 1e9)
      END) AS sleep_w,
  COALESCE(MAX(CASE WHEN supplied
                    THEN CAST(output_uv_mean AS DOUBLE) / 1e6 * (CAST(output_na_max AS DOUBLE) / 1e9)
               END), 0.0) AS active_w,
  MAX(output_uv_mean) / 1e6 AS output_v_max
FROM (
  SELECT *, (cutoff_ms + stalled_ms = 0 AND output_uv_mean > 0) AS supplied
  FROM reports
) AS marked
GROUP BY node_id
ORDER BY node_id
