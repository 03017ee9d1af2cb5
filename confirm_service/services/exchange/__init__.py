"""File import and export of the observation log: CSV, JSON Lines and VOTable.

The exchange format
-------------------
One row per detection; the same columns in all three formats.

Observation columns (units in the names)::

    site, target, pointing_ra_deg, pointing_dec_deg, start, duration_s,
    frequency_min_hz, frequency_max_hz, channel_width_hz, time_resolution_s,
    on_source, beam, cadence, pipeline_run

Detection columns::

    frequency_hz, drift_hz_s, snr, time_offset_s, bandwidth_hz, detection_beam, candidate

``detection_beam`` is the detection's ``beam``; ``candidate`` is the pipeline's own flag.

* Consecutive rows whose observation columns are identical form one observation (identical as
  written: in CSV ``300`` and ``300.0`` differ, in JSON Lines and VOTable equal numbers are the
  same). A row whose detection columns are all empty is an observation without detections.
* ``start`` is ISO 8601 with a UTC offset (``2026-11-20T03:00:00+00:00``); a naive timestamp is
  refused. Export writes UTC with ``+00:00``.
* Numbers are float64. CSV and JSON Lines carry the shortest text that reads back to the same
  float64 (Python ``repr``), so values survive a round trip to the last bit.
* An empty cell (CSV), a missing key or ``null`` (JSON Lines) or a null cell (VOTable) means
  "not given"; an empty text is the same as no text.
* Booleans (``on_source``, ``candidate``): ``true``/``false`` in CSV (any letter case), JSON
  booleans in JSON Lines, VOTable ``boolean``.
* Export adds ``observation_id`` (first column) and ``detection_id`` (before the detection
  columns); import ignores both.

Formats:

* CSV: RFC 4180 style through the ``csv`` module, UTF-8 (a byte-order mark is ignored), one header
  line naming the columns. Columns may come in any order; site, start, duration_s,
  frequency_min_hz, frequency_max_hz, channel_width_hz, time_resolution_s and on_source must be
  there, the others may be left out. An unknown column makes the file unusable.
* JSON Lines: one flat JSON object per line, UTF-8; an unknown key refuses its row.
* VOTable: the first TABLE; FIELD names are the column names (as for the CSV header). Float
  columns are ``double``: a 32-bit ``float`` FIELD is refused, as it cannot carry a frequency to
  the hertz. FIELD ``unit`` attributes give Hz, Hz/s, s and deg (VOUnit spelling, so Hz/s is
  written ``Hz.s**-1``); a FIELD whose unit differs from the one its name implies is refused
  rather than converted. Booleans are ``boolean`` (which has a null), texts ``unicodeChar``.
* The summary of an import counts rows read, accepted and refused, observations created and
  refused, detections created, and lists the first reasons (line or row, column, message).

Import reads CSV and JSON Lines row by row; astropy parses a VOTable whole. Each observation is
created in its own write transaction through
:func:`confirm_service.services.observations.create_observation`: a group with any bad row is
refused whole and nothing of it is written. Rows are numbered by file line (CSV, JSON Lines; the
header is line 1) or by table row (VOTable, from 1). An unreadable row (a malformed JSON line, a CSV
record with the wrong number of cells) refuses the observation it sits in and, when it sits on a
boundary, the observation after it too, since it may have belonged to either.

Export pages through observations and their detections by id (keyset pagination). CSV and JSON
Lines are written as they are read; a VOTable is assembled in memory and written at the end.
The file appears under its name only when complete.

Importing the same file twice records the observations twice: the format carries no identity.

The package has one module per job: ``columns`` (the column set, types, units and formats),
``readers`` (rows out of each format), ``validation`` (cells to values, rows grouped into
observations, the field rules), ``importer`` (one transaction per observation, the summary),
``writers`` (each format) and ``export`` (rows out of the database, page by page).
"""
