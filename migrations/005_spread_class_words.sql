-- Spread classes renamed to the words of ensemble verification: too-narrow → under-dispersive,
-- reliable → calibrated, too-wide (conservative) → over-dispersive. Stored hindcast results (the
-- only stored place that holds a class) are rewritten so old and new results read alike; nothing
-- else in them changes. "too-narrow" and "too-wide (conservative)" occur in a result only as the
-- class (value, rule text, advice reasons); "reliable" is rewritten only where it is the class.
update jobs
set result = replace(replace(replace(replace(replace(replace(replace(replace(replace(
      result::text,
      'too-wide (conservative)', 'over-dispersive'),
      'too-narrow', 'under-dispersive'),
      '"class": "reliable"', '"class": "calibrated"'),
      '"spreadCorrected": "reliable"', '"spreadCorrected": "calibrated"'),
      '"spreadStochastic": "reliable"', '"spreadStochastic": "calibrated"'),
      'else reliable"', 'else calibrated"'),
      'corrected reliable (', 'corrected calibrated ('),
      'stochastic reliable (', 'stochastic calibrated ('),
      'has a reliable spread', 'has a calibrated spread')::jsonb
where kind = 'hindcast'
  and result is not null
  and (result::text like '%too-narrow%' or result::text like '%too-wide (conservative)%' or result::text like '%reliable%');
