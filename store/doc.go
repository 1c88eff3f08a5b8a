// Package store keeps what a bearing station hears in one SQLite database:
// stations, captures, transmitters, bursts with their level readings,
// antenna headings, bearings, slot schedules and fixes. It is the only
// place in nullseek that holds SQL; the rest of the program reads and
// writes the plain row types declared here and maps them to and from its
// own types.
//
// The database is opened in WAL mode with synchronous=NORMAL, a busy
// timeout and foreign keys on (see Open). Its schema carries a version in
// PRAGMA user_version and is brought up to date by ordered migration steps,
// each in one transaction; a database written by a newer nullseek is
// refused. High-volume rows (bursts, level readings, headings, bearings)
// go through a Writer that commits in batches at least once a second, so a
// crash loses at most the last second; the readings of a transmission
// still on the air are written as they come (open readings, see
// Writer.AddOpenReadings), so a long carrier is held neither in memory nor
// at risk. Every row has a natural key and is
// written with an UPSERT, so re-running the same recording changes rows in
// place instead of adding new ones.
//
// Conventions: times are UTC and stored as INTEGER nanoseconds since the
// Unix epoch in columns named *_unix_ns (NULL when the recording did not
// say); capture-relative times are seconds from sample 0 (columns *_s);
// angles are degrees clockwise from TRUE north in [0, 360) unless the name
// says magnetic; declination is east positive (true = magnetic +
// declination, WMM convention); levels are dBFS; frequencies Hz. Column
// and field names carry their units. A Go field that may be unknown is a
// pointer (nil ↔ NULL) or, where the source types already use that
// convention, a zero time.Time. NaN and ±Inf are refused before they reach
// the database.
package store
