package receiver

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"

	"nullseek/dsp"
	"nullseek/sdr"
)

// CarrierSearch configures FindCarriers; zero values take the defaults.
type CarrierSearch struct {
	// BinHz is the spectrum's resolution (default about 250 Hz).
	BinHz float64
	// MinSNRDB is the least peak height above the median floor (default 10).
	MinSNRDB float64
	// ChannelHz merges peaks closer than this into one carrier, the
	// strongest (default 12500: a modulated FM carrier shows many peaks).
	ChannelHz float64
	// MaxFrames bounds the work: frames are spread evenly over a recording
	// of known length (default 3000). Streams of unknown length are
	// searched over their first LiveSeconds (default 20 s).
	MaxFrames   int
	LiveSeconds float64
}

// maxCarrierFFT bounds the carrier search's spectrum: 2^22 points (32 MiB
// of complex64 per buffer) resolves 2.4 MS/s to 0.6 Hz, finer than any
// carrier search needs.
const maxCarrierFFT = 1 << 22

// FindCarriers averages the power spectrum of src (Welch, Hann window) and
// lists the carriers standing above the floor, strongest first, with
// offsets relative to the capture centre. It reads src; reopen it to scan.
func FindCarriers(src sdr.Source, cs CarrierSearch) ([]dsp.Carrier, error) {
	info := src.Info()
	if err := info.Validate(); err != nil {
		return nil, fmt.Errorf("find carriers: %w", err)
	}
	if !(cs.BinHz >= 0) || math.IsInf(cs.BinHz, 0) {
		return nil, fmt.Errorf("find carriers: resolution %v Hz is not a positive number", cs.BinHz)
	}
	if cs.BinHz == 0 {
		cs.BinHz = 250
	}
	if cs.MinSNRDB <= 0 {
		cs.MinSNRDB = 10
	}
	if cs.ChannelHz <= 0 {
		cs.ChannelHz = 12500
	}
	if cs.MaxFrames <= 0 {
		cs.MaxFrames = 3000
	}
	if cs.LiveSeconds <= 0 {
		cs.LiveSeconds = 20
	}
	nfft := 1
	for float64(nfft) < info.SampleRate/cs.BinHz {
		if nfft == maxCarrierFFT {
			return nil, fmt.Errorf("find carriers: %g Hz resolution at %g S/s needs an FFT over %d points: give a coarser resolution", cs.BinHz, info.SampleRate, maxCarrierFFT)
		}
		nfft *= 2
	}
	nfft = max(nfft, 64)
	avg, err := dsp.NewSpectrumAverager(nfft)
	if err != nil {
		return nil, err
	}
	// Read in blocks of stride samples, keep one FFT frame of each.
	stride := nfft
	limit := int64(math.MaxInt64)
	if info.Samples > 0 {
		stride = max(nfft, int(info.Samples/int64(cs.MaxFrames)))
	} else {
		limit = int64(cs.LiveSeconds * info.SampleRate)
	}
	buf := make([]complex64, stride)
	var read int64
	for read < limit {
		got, err := readFull(src, buf)
		if got >= nfft {
			avg.Add(buf[:nfft])
		}
		read += int64(got)
		if err != nil {
			if errors.Is(err, io.EOF) {
				break
			}
			return nil, err // the source names itself
		}
	}
	if avg.Frames() == 0 {
		return nil, fmt.Errorf("%s: too short for a spectrum (%d samples, need %d)", info.Name, read, nfft)
	}
	spec := avg.Result(nil)
	found := dsp.FindCarriers(spec, info.SampleRate, cs.MinSNRDB)
	sort.Slice(found, func(i, j int) bool { return found[i].LevelDB > found[j].LevelDB })
	// Merge the peaks of one channel (an FM carrier shows sidebands at the
	// tone's multiples, often stronger than the carrier itself): the
	// carrier is the power-weighted centre of its channel's peaks.
	var out []dsp.Carrier
	var wsum, fsum []float64
	for _, c := range found {
		w := math.Pow(10, c.LevelDB/10)
		k := -1
		for i, o := range out {
			if math.Abs(o.OffsetHz-c.OffsetHz) < cs.ChannelHz/2 {
				k = i
				break
			}
		}
		if k < 0 {
			out = append(out, c)
			wsum = append(wsum, w)
			fsum = append(fsum, w*c.OffsetHz)
			continue
		}
		wsum[k] += w
		fsum[k] += w * c.OffsetHz
	}
	for i := range out {
		out[i].OffsetHz = fsum[i] / wsum[i]
	}
	return out, nil
}

// readFull reads until buf is full or the stream ends.
func readFull(src sdr.Source, buf []complex64) (int, error) {
	n := 0
	for n < len(buf) {
		k, err := src.Read(buf[n:])
		n += k
		if err != nil {
			return n, err
		}
		if k == 0 {
			return n, io.ErrNoProgress
		}
	}
	return n, nil
}

// WriteCarriers prints the carriers cs found in the stream described by
// info as a table (`scan --list`): offset, frequency (when the centre is
// known), level per bin and SNR.
func WriteCarriers(w io.Writer, cs []dsp.Carrier, info sdr.Info) error {
	fmt.Fprintf(w, "%-4s %12s %14s %10s %8s\n", "#", "offset Hz", "freq MHz", "dBFS/bin", "SNR dB")
	for i, c := range cs {
		f := "-"
		if info.CenterHz != 0 {
			f = fmt.Sprintf("%.6f", (info.CenterHz+c.OffsetHz)/1e6)
		}
		fmt.Fprintf(w, "%-4d %12.0f %14s %10.1f %8.1f\n", i+1, c.OffsetHz, f, c.LevelDB, c.SNRDB)
	}
	_, err := fmt.Fprintf(w, "%d carriers in %s (averaged spectrum)\n", len(cs), info.Name)
	return err
}

// WriteCarriersJSON prints one JSON line per carrier (`scan --list
// --json`): type "carrier", offset_hz, level_dbfs, snr_db and, when the
// centre is known, freq_hz.
func WriteCarriersJSON(w io.Writer, cs []dsp.Carrier, info sdr.Info) error {
	enc := json.NewEncoder(w)
	for _, c := range cs {
		m := map[string]any{"type": "carrier", "offset_hz": c.OffsetHz, "level_dbfs": c.LevelDB, "snr_db": c.SNRDB}
		if info.CenterHz != 0 {
			m["freq_hz"] = info.CenterHz + c.OffsetHz
		}
		if err := enc.Encode(m); err != nil {
			return err
		}
	}
	return nil
}
