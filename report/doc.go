// Package report writes a session report: one self-contained HTML page
// with the map, the polar plots, the slot schedule, the bearings and the
// fixes, and what each bearing was measured from (recording, station,
// antenna, heading source, time span, bursts used, sigma, north).
//
// The page needs nothing from the network: images are embedded as data:
// URIs (RFC 2397), the style sheet is inline and there is no script. Every
// text that comes from the caller (identifiers and station names come from
// files) is escaped by html/template (Go standard library, contextual
// auto-escaping); images are accepted only as PNG (checked by signature,
// ISO/IEC 15948 clause 5.2) or SVG, and an SVG shown through <img> runs no
// script (HTML Living Standard, "the img element": images are processed
// in secure animated mode, without scripts).
//
// The package does not draw and does not compute: the caller fills a
// Report (the builders FixFromReport and ScheduleFromPlan turn the fix and
// schedule results into rows) and passes the images in as bytes. A
// number that is not finite is shown as "—", an empty text as "not
// recorded".
//
// Conventions, also stated on the page: times are UTC, written
// YYYY-MM-DD hh:mm:ss (ISO 8601); bearings and ellipse axes are degrees
// clockwise from true north, 0–360 (a bearing's North column says when it
// was taken from magnetic north); sigma is one standard deviation;
// positions are WGS 84 latitude and longitude in decimal degrees, north
// and east positive; the ellipse is the fix's error ellipse at the stated
// probability, given by its semi-axes in metres.
package report
