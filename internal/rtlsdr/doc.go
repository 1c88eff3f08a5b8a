// Package rtlsdr is a small cgo binding to librtlsdr (Debian librtlsdr-dev
// 0.6.0, header rtl-sdr.h; osmocom/rtl-sdr). The binding is compiled only
// with the build tag "rtlsdr"; without it this package is empty and package sdr
// reports that USB support was not built in.
package rtlsdr
