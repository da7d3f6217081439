-- bitsift <version> - information-gain ranking, dialect mariadb, <time>
-- table: bitsift_golden
-- target: y
-- attributes: word (categorical), level (categorical), noise (categorical), score (numeric), ratio (numeric)
-- missing values: category; numeric binning: score quantile 4 bins; ratio quantile 4 bins
-- one row per attribute (attribute_index 0 describes the target); entropies in bits.
-- p-value: chi-square survival function of g_statistic with dof degrees of freedom,
-- e.g. Python: scipy.stats.chi2.sf(g_statistic, dof).
-- information_gain_low/high: an interval at level 0.95 of the bias-corrected gain (information_gain_corrected +/- z * information_gain_se, clipped at 0); rank_low/rank_high: the best and worst rank it allows among the attributes.
WITH RECURSIVE ordered_4 AS (
  SELECT
    CAST(`score` AS DOUBLE) AS v,
    ROW_NUMBER() OVER (
      ORDER BY CASE WHEN CAST(`score` AS DOUBLE) IS NULL THEN 1 ELSE 0 END, CAST(`score` AS DOUBLE)
    ) AS rn,
    COUNT(*) OVER () AS cnt
  FROM `bitsift_golden`
  WHERE
    NOT `y` IS NULL AND NOT `score` IS NULL
), bounds_4 AS (
  SELECT
    MAX(CASE WHEN rn = FLOOR((
      cnt - 1
    ) * 0.25) + 1 THEN v END) + (
      (
        MAX(cnt) - 1
      ) * 0.25 - FLOOR((
        MAX(cnt) - 1
      ) * 0.25)
    ) * (
      COALESCE(
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.25) + 2 THEN v END),
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.25) + 1 THEN v END)
      ) - MAX(CASE WHEN rn = FLOOR((
        cnt - 1
      ) * 0.25) + 1 THEN v END)
    ) AS c4_1,
    MAX(CASE WHEN rn = FLOOR((
      cnt - 1
    ) * 0.5) + 1 THEN v END) + (
      (
        MAX(cnt) - 1
      ) * 0.5 - FLOOR((
        MAX(cnt) - 1
      ) * 0.5)
    ) * (
      COALESCE(
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.5) + 2 THEN v END),
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.5) + 1 THEN v END)
      ) - MAX(CASE WHEN rn = FLOOR((
        cnt - 1
      ) * 0.5) + 1 THEN v END)
    ) AS c4_2,
    MAX(CASE WHEN rn = FLOOR((
      cnt - 1
    ) * 0.75) + 1 THEN v END) + (
      (
        MAX(cnt) - 1
      ) * 0.75 - FLOOR((
        MAX(cnt) - 1
      ) * 0.75)
    ) * (
      COALESCE(
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.75) + 2 THEN v END),
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.75) + 1 THEN v END)
      ) - MAX(CASE WHEN rn = FLOOR((
        cnt - 1
      ) * 0.75) + 1 THEN v END)
    ) AS c4_3
  FROM ordered_4
), ordered_5 AS (
  SELECT
    CAST(`ratio` AS DOUBLE) AS v,
    ROW_NUMBER() OVER (
      ORDER BY CASE WHEN CAST(`ratio` AS DOUBLE) IS NULL THEN 1 ELSE 0 END, CAST(`ratio` AS DOUBLE)
    ) AS rn,
    COUNT(*) OVER () AS cnt
  FROM `bitsift_golden`
  WHERE
    NOT `y` IS NULL AND NOT `ratio` IS NULL
), bounds_5 AS (
  SELECT
    MAX(CASE WHEN rn = FLOOR((
      cnt - 1
    ) * 0.25) + 1 THEN v END) + (
      (
        MAX(cnt) - 1
      ) * 0.25 - FLOOR((
        MAX(cnt) - 1
      ) * 0.25)
    ) * (
      COALESCE(
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.25) + 2 THEN v END),
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.25) + 1 THEN v END)
      ) - MAX(CASE WHEN rn = FLOOR((
        cnt - 1
      ) * 0.25) + 1 THEN v END)
    ) AS c5_1,
    MAX(CASE WHEN rn = FLOOR((
      cnt - 1
    ) * 0.5) + 1 THEN v END) + (
      (
        MAX(cnt) - 1
      ) * 0.5 - FLOOR((
        MAX(cnt) - 1
      ) * 0.5)
    ) * (
      COALESCE(
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.5) + 2 THEN v END),
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.5) + 1 THEN v END)
      ) - MAX(CASE WHEN rn = FLOOR((
        cnt - 1
      ) * 0.5) + 1 THEN v END)
    ) AS c5_2,
    MAX(CASE WHEN rn = FLOOR((
      cnt - 1
    ) * 0.75) + 1 THEN v END) + (
      (
        MAX(cnt) - 1
      ) * 0.75 - FLOOR((
        MAX(cnt) - 1
      ) * 0.75)
    ) * (
      COALESCE(
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.75) + 2 THEN v END),
        MAX(CASE WHEN rn = FLOOR((
          cnt - 1
        ) * 0.75) + 1 THEN v END)
      ) - MAX(CASE WHEN rn = FLOOR((
        cnt - 1
      ) * 0.75) + 1 THEN v END)
    ) AS c5_3
  FROM ordered_5
), counts AS (
  SELECT
    0 AS attr,
    a1,
    a2,
    a3,
    a4,
    a5,
    y,
    0 AS n
  FROM (
    SELECT
      CAST(src.`y` AS BINARY) AS y,
      CAST(src.`word` AS BINARY) AS a1,
      CAST(src.`level` AS BINARY) AS a2,
      CAST(src.`noise` AS BINARY) AS a3,
      0 AS a4,
      0 AS a5
    FROM `bitsift_golden` AS src
  ) AS typed_row
  WHERE
    1 = 0
  UNION ALL
  SELECT
    0 AS attr,
    NULL AS a1,
    NULL AS a2,
    NULL AS a3,
    NULL AS a4,
    NULL AS a5,
    y,
    COUNT(*) AS n
  FROM (
    SELECT
      CAST(src.`y` AS BINARY) AS y
    FROM `bitsift_golden` AS src
  ) AS rows_0
  GROUP BY
    y
  UNION ALL
  SELECT
    1 AS attr,
    a1 AS a1,
    NULL AS a2,
    NULL AS a3,
    NULL AS a4,
    NULL AS a5,
    y,
    COUNT(*) AS n
  FROM (
    SELECT
      CAST(src.`y` AS BINARY) AS y,
      CAST(src.`word` AS BINARY) AS a1
    FROM `bitsift_golden` AS src
  ) AS rows_1
  GROUP BY
    a1,
    y
  UNION ALL
  SELECT
    2 AS attr,
    NULL AS a1,
    a2 AS a2,
    NULL AS a3,
    NULL AS a4,
    NULL AS a5,
    y,
    COUNT(*) AS n
  FROM (
    SELECT
      CAST(src.`y` AS BINARY) AS y,
      CAST(src.`level` AS BINARY) AS a2
    FROM `bitsift_golden` AS src
  ) AS rows_2
  GROUP BY
    a2,
    y
  UNION ALL
  SELECT
    3 AS attr,
    NULL AS a1,
    NULL AS a2,
    a3 AS a3,
    NULL AS a4,
    NULL AS a5,
    y,
    COUNT(*) AS n
  FROM (
    SELECT
      CAST(src.`y` AS BINARY) AS y,
      CAST(src.`noise` AS BINARY) AS a3
    FROM `bitsift_golden` AS src
  ) AS rows_3
  GROUP BY
    a3,
    y
  UNION ALL
  SELECT
    4 AS attr,
    NULL AS a1,
    NULL AS a2,
    NULL AS a3,
    a4 AS a4,
    NULL AS a5,
    y,
    COUNT(*) AS n
  FROM (
    SELECT
      CAST(src.`y` AS BINARY) AS y,
      CASE
        WHEN src.`score` IS NULL
        THEN NULL
        WHEN CAST(src.`score` AS DOUBLE) < bounds.c4_1
        THEN 0
        WHEN CAST(src.`score` AS DOUBLE) < bounds.c4_2
        THEN 1
        WHEN CAST(src.`score` AS DOUBLE) < bounds.c4_3
        THEN 2
        ELSE 3
      END AS a4
    FROM `bitsift_golden` AS src
    CROSS JOIN bounds_4 AS bounds
  ) AS rows_4
  GROUP BY
    a4,
    y
  UNION ALL
  SELECT
    5 AS attr,
    NULL AS a1,
    NULL AS a2,
    NULL AS a3,
    NULL AS a4,
    a5 AS a5,
    y,
    COUNT(*) AS n
  FROM (
    SELECT
      CAST(src.`y` AS BINARY) AS y,
      CASE
        WHEN src.`ratio` IS NULL
        THEN NULL
        WHEN CAST(src.`ratio` AS DOUBLE) < bounds.c5_1
        THEN 0
        WHEN CAST(src.`ratio` AS DOUBLE) < bounds.c5_2
        THEN 1
        WHEN CAST(src.`ratio` AS DOUBLE) < bounds.c5_3
        THEN 2
        ELSE 3
      END AS a5
    FROM `bitsift_golden` AS src
    CROSS JOIN bounds_5 AS bounds
  ) AS rows_5
  GROUP BY
    a5,
    y
  UNION ALL
  SELECT
    attr,
    a1,
    a2,
    a3,
    a4,
    a5,
    y,
    n
  FROM counts
  WHERE
    1 = 0
), cells AS (
  SELECT
    attr,
    n,
    SUM(n) OVER (PARTITION BY attr, a1, a2, a3, a4, a5) AS n_x,
    ROW_NUMBER() OVER (
      PARTITION BY attr, a1, a2, a3, a4, a5
      ORDER BY CASE WHEN y IS NULL THEN 1 ELSE 0 END, y
    ) AS x_first,
    SUM(n) OVER (PARTITION BY attr, y) AS n_y,
    ROW_NUMBER() OVER (PARTITION BY attr, y ORDER BY CASE WHEN n IS NULL THEN 1 ELSE 0 END, n) AS y_first,
    SUM(n) OVER (PARTITION BY attr) AS n_all
  FROM counts
  WHERE
    NOT y IS NULL
), per_attribute AS (
  SELECT
    attr,
    CAST(SUM(n) AS SIGNED) AS n_total,
    CAST(SUM(n) AS DOUBLE) AS n_total_f,
    CAST(SUM(CASE WHEN x_first = 1 THEN 1 ELSE 0 END) AS SIGNED) AS n_values,
    CAST(SUM(CASE WHEN y_first = 1 THEN 1 ELSE 0 END) AS SIGNED) AS n_classes,
    CAST(SUM(CAST(CAST(n AS DOUBLE) * LN(CAST(n AS DOUBLE)) AS DECIMAL(38, 18))) AS DOUBLE) AS s_xy,
    CAST(SUM(
      CAST(CASE WHEN x_first = 1 THEN CAST(n_x AS DOUBLE) * LN(CAST(n_x AS DOUBLE)) ELSE 0 END AS DECIMAL(38, 18))
    ) AS DOUBLE) AS s_x,
    CAST(SUM(
      CAST(CASE WHEN y_first = 1 THEN CAST(n_y AS DOUBLE) * LN(CAST(n_y AS DOUBLE)) ELSE 0 END AS DECIMAL(38, 18))
    ) AS DOUBLE) AS s_y,
    CAST(SUM(
      CAST(CAST(n AS DOUBLE) * (
        (
          LN(CAST(n AS DOUBLE)) - LN(CAST(n_x AS DOUBLE))
        ) - (
          LN(CAST(n_y AS DOUBLE)) - LN(CAST(n_all AS DOUBLE))
        )
      ) * (
        (
          LN(CAST(n AS DOUBLE)) - LN(CAST(n_x AS DOUBLE))
        ) - (
          LN(CAST(n_y AS DOUBLE)) - LN(CAST(n_all AS DOUBLE))
        )
      ) AS DECIMAL(38, 18))
    ) AS DOUBLE) AS s_kk
  FROM cells
  GROUP BY
    attr
), entropies AS (
  SELECT
    attr,
    n_total,
    n_total_f,
    n_values,
    n_classes,
    CASE
      WHEN n_classes > 1
      THEN (
        LN(n_total_f) - s_y / n_total_f
      ) / LN(2)
      ELSE 0
    END AS h_y,
    CASE WHEN n_values > 1 THEN (
      LN(n_total_f) - s_x / n_total_f
    ) / LN(2) ELSE 0 END AS h_x,
    (
      s_x - s_xy
    ) / n_total_f / LN(2) AS h_y_given_x,
    s_kk / n_total_f / (
      LN(2) * LN(2)
    ) AS k_bits
  FROM per_attribute
), gains AS (
  SELECT
    attr,
    n_total,
    n_total_f,
    n_values,
    n_classes,
    h_y,
    h_x,
    CASE WHEN n_values > 1 AND h_y - h_y_given_x > 0 THEN h_y - h_y_given_x ELSE 0 END AS ig,
    CASE
      WHEN k_bits - (
        h_y - h_y_given_x
      ) * (
        h_y - h_y_given_x
      ) > 0
      THEN k_bits - (
        h_y - h_y_given_x
      ) * (
        h_y - h_y_given_x
      )
      ELSE 0
    END AS ig_variance
  FROM entropies
), uncertainty AS (
  SELECT
    attr,
    se,
    corrected,
    CASE
      WHEN corrected - 1.959963984540054 * se > 0
      THEN corrected - 1.959963984540054 * se
      ELSE 0
    END AS ig_low,
    CASE
      WHEN corrected + 1.959963984540054 * se > 0
      THEN corrected + 1.959963984540054 * se
      ELSE 0
    END AS ig_high
  FROM (
    SELECT
      attr,
      SQRT(ig_variance / (
        n_total_f + 1
      )) AS se,
      ig - (
        n_values - 1
      ) * (
        n_classes - 1
      ) / (
        2 * n_total_f * LN(2)
      ) AS corrected
    FROM gains
  ) AS spread
), rank_ranges AS (
  SELECT
    a.attr,
    CAST(1 + SUM(CASE WHEN b.attr <> a.attr AND b.ig_low > a.ig_high THEN 1 ELSE 0 END) AS SIGNED) AS rank_low,
    CAST(SUM(CASE WHEN b.ig_high >= a.ig_low THEN 1 ELSE 0 END) AS SIGNED) AS rank_high
  FROM uncertainty AS a
  JOIN uncertainty AS b
    ON b.attr > 0
  WHERE
    a.attr > 0
  GROUP BY
    a.attr
), excluded AS (
  SELECT
    COALESCE(SUM(n), 0) AS rows_excluded
  FROM counts
  WHERE
    attr = 0 AND y IS NULL
)
SELECT
  g.attr AS attribute_index,
  CASE g.attr
    WHEN 0
    THEN 'y'
    WHEN 1
    THEN 'word'
    WHEN 2
    THEN 'level'
    WHEN 3
    THEN 'noise'
    WHEN 4
    THEN 'score'
    WHEN 5
    THEN 'ratio'
  END AS attribute,
  CASE g.attr
    WHEN 0
    THEN 'target'
    WHEN 1
    THEN 'categorical'
    WHEN 2
    THEN 'categorical'
    WHEN 3
    THEN 'categorical'
    WHEN 4
    THEN 'numeric'
    WHEN 5
    THEN 'numeric'
  END AS kind,
  g.n_total AS rows_used,
  e.rows_excluded AS rows_excluded,
  g.n_values AS distinct_values,
  g.n_classes AS classes,
  g.h_y AS target_entropy,
  g.h_x AS attribute_entropy,
  g.h_y - g.ig AS conditional_entropy,
  g.ig AS information_gain,
  CASE WHEN g.n_values > 1 THEN g.ig / g.h_x ELSE 0 END AS gain_ratio,
  CASE WHEN g.h_x + g.h_y > 0 THEN 2 * g.ig / (
    g.h_x + g.h_y
  ) ELSE 0 END AS symmetric_uncertainty,
  2 * g.n_total_f * LN(2) * g.ig AS g_statistic,
  (
    g.n_values - 1
  ) * (
    g.n_classes - 1
  ) AS dof,
  u.se AS information_gain_se,
  u.corrected AS information_gain_corrected,
  u.ig_low AS information_gain_low,
  u.ig_high AS information_gain_high,
  r.rank_low AS rank_low,
  r.rank_high AS rank_high
FROM excluded AS e
LEFT JOIN gains AS g
  ON 1 = 1
LEFT JOIN uncertainty AS u
  ON u.attr = g.attr
LEFT JOIN rank_ranges AS r
  ON r.attr = g.attr
ORDER BY
  CASE WHEN CASE WHEN g.attr = 0 THEN 0 ELSE 1 END IS NULL THEN 1 ELSE 0 END, CASE WHEN g.attr = 0 THEN 0 ELSE 1 END,
  information_gain DESC,
  CASE WHEN g.attr IS NULL THEN 1 ELSE 0 END, g.attr;
