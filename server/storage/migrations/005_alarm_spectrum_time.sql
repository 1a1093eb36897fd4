-- The analyzer's time of the spectrum behind an alarm, beside the server's time of receipt
-- (raised_at, cleared_at): replayed, buffered or accelerated data is stamped late by the server.
-- raised_spectrum_t: the spectrum that raised the alarm; spectrum_t: the spectrum of its latest
-- change (the one `seq` names). Null for alarms no spectrum caused (stale data, analyzer status).
ALTER TABLE alarms ADD COLUMN raised_spectrum_t REAL;
ALTER TABLE alarms ADD COLUMN spectrum_t REAL;
