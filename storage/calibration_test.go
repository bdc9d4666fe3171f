package storage_test

import (
	"errors"
	"math"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/calibrate"
	"liftyard/storage"
)

// calRecord is an invented calibration of a channel (a scenario of our own).
func calRecord(channel string, created time.Time) calibrate.Record {
	return calibrate.Record{
		Channel: channel, Unit: "N", Created: created, Who: "R. Tan <lab>", Reference: "M1 dead weights",
		ReferenceU: 0.004, ValidUntil: created.AddDate(0, 6, 0),
		Points: []calibrate.Point{{Applied: 0, Reading: 12480.25, Direction: calibrate.Up}, {Applied: 50, Reading: 2058733.1, Direction: calibrate.Up}, {Applied: 0, Reading: 12486.2, Direction: calibrate.Down}},
		Fit: calibrate.Fit{Order: 1, Poly: []float64{-0.30470938153, 2.4438372716e-5}, PolyU: []float64{1e-3, 2e-10},
			Cov: [][]float64{{1e-6, -1e-13}, {-1e-13, 4e-20}}, ResidualSD: 0.0123, Dof: 1,
			NonlinearityPctFS: 0.01, HysteresisPctFS: 0.2, Warnings: []string{"only 1 degree of freedom"}},
	}
}

// Ensure that records are stored with ids "<channel>-<YYYYMMDD>-<n>" (n per
// channel and day), read back bit for bit, and listed newest first per
// channel and across channels.
func TestPutCalibration_History(t *testing.T) {
	s := MustOpenStore(t)
	day := time.Date(2026, 12, 1, 9, 0, 0, 0, time.UTC)
	steps := []struct {
		channel string
		created time.Time
		wantID  string
	}{
		{"n_fore", day, "n_fore-20261201-1"},
		{"n_fore", day.Add(time.Hour), "n_fore-20261201-2"},
		{"n_aft", day.Add(2 * time.Hour), "n_aft-20261201-1"},
		{"n_fore", day.AddDate(0, 0, 1), "n_fore-20261202-1"},
		// Created 23:30 at UTC−5 is 04:30 UTC the next day: the id takes the UTC date.
		{"n_aft", time.Date(2026, 12, 2, 23, 30, 0, 0, time.FixedZone("yard", -5*3600)), "n_aft-20261203-1"},
	}
	for _, st := range steps {
		id, err := s.PutCalibration(calRecord(st.channel, st.created))
		if err != nil {
			t.Fatalf("put %s: %v", st.wantID, err)
		}
		if id != st.wantID {
			t.Errorf("id %q, want %q", id, st.wantID)
		}
	}
	got, err := s.Calibration("n_fore-20261201-2")
	if err != nil {
		t.Fatal(err)
	}
	want := calRecord("n_fore", day.Add(time.Hour))
	want.ID = "n_fore-20261201-2"
	if !got.Created.Equal(want.Created) {
		t.Errorf("created %v, want %v", got.Created, want.Created)
	}
	got.Created = want.Created
	got.ValidUntil = want.ValidUntil
	if !reflect.DeepEqual(got, want) {
		t.Errorf("record\n got %+v\nwant %+v", got, want)
	}

	ids := func(recs []calibrate.Record) []string {
		var out []string
		for _, r := range recs {
			out = append(out, r.ID)
		}
		return out
	}
	fore, err := s.Calibrations("n_fore")
	if err != nil {
		t.Fatal(err)
	}
	if w := []string{"n_fore-20261202-1", "n_fore-20261201-2", "n_fore-20261201-1"}; !reflect.DeepEqual(ids(fore), w) {
		t.Errorf("n_fore history %v, want %v", ids(fore), w)
	}
	all, err := s.Calibrations("")
	if err != nil {
		t.Fatal(err)
	}
	if w := []string{"n_aft-20261203-1", "n_fore-20261202-1", "n_aft-20261201-1", "n_fore-20261201-2", "n_fore-20261201-1"}; !reflect.DeepEqual(ids(all), w) {
		t.Errorf("all history %v, want %v", ids(all), w)
	}
	none, err := s.Calibrations("pitot")
	if err != nil || len(none) != 0 || none == nil {
		t.Errorf("channel without records: %v, %v (want an empty slice)", none, err)
	}
}

// Ensure that a record without a Created time gets the store's clock, and
// that a record survives closing and reopening the file.
func TestPutCalibration_ClockAndReopen(t *testing.T) {
	path := filepath.Join(t.TempDir(), "cal.db")
	now := time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC)
	s, err := storage.Open(path, storage.Options{Now: func() time.Time { return now }})
	if err != nil {
		t.Fatal(err)
	}
	rec := calRecord("pitot", time.Time{})
	id, err := s.PutCalibration(rec)
	if err != nil {
		t.Fatal(err)
	}
	if id != "pitot-20260304-1" {
		t.Errorf("id %q", id)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	s2 := MustOpenStoreAt(t, path, storage.Options{})
	got, err := s2.Calibration(id)
	if err != nil {
		t.Fatal(err)
	}
	if !got.Created.Equal(now) || got.Fit.Poly[1] != rec.Fit.Poly[1] {
		t.Errorf("reopened record: created %v poly %v", got.Created, got.Fit.Poly)
	}
}

// Ensure that bad records are refused with ErrBadRecord and an explicit id
// is never overwritten.
func TestPutCalibration_Refused(t *testing.T) {
	s := MustOpenStore(t)
	day := time.Date(2026, 12, 1, 9, 0, 0, 0, time.UTC)
	first := calRecord("n_fore", day)
	first.ID = "fore-cert-4711"
	if _, err := s.PutCalibration(first); err != nil {
		t.Fatal(err)
	}
	nan := calRecord("n_fore", day)
	nan.Fit.ResidualSD = math.NaN()
	tests := []struct {
		name string
		rec  calibrate.Record
		want string
	}{
		{"no channel", calRecord("", day), "channel is empty"},
		{"slash in channel", calRecord("a/b", day), `channel "a/b" holds a '/'`},
		{"space in id", func() calibrate.Record { r := calRecord("n_fore", day); r.ID = "my cal"; return r }(), `id "my cal" holds a '/', a space`},
		{"id too long", func() calibrate.Record { r := calRecord("n_fore", day); r.ID = strings.Repeat("x", 201); return r }(), "id is 201 bytes long"},
		{"id taken", first, `calibration "fore-cert-4711" is already stored`},
		{"NaN", nan, "unsupported value: NaN"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := s.PutCalibration(tt.rec)
			if !errors.Is(err, storage.ErrBadRecord) {
				t.Fatalf("error %v, want ErrBadRecord", err)
			}
			if !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %q does not say %q", err, tt.want)
			}
		})
	}
	got, err := s.Calibration("fore-cert-4711")
	if err != nil || got.Who != first.Who {
		t.Errorf("first record changed: %+v, %v", got, err)
	}
	recs, _ := s.Calibrations("n_fore")
	if len(recs) != 1 {
		t.Errorf("refused records were indexed: %d records", len(recs))
	}
}

// Ensure that an unknown id gives ErrNotFound.
func TestCalibration_NotFound(t *testing.T) {
	s := MustOpenStore(t)
	if _, err := s.Calibration("nope"); !errors.Is(err, storage.ErrNotFound) {
		t.Errorf("error %v, want ErrNotFound", err)
	}
	if _, err := s.PutCalibration(calRecord("n_fore", time.Now())); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Calibration("nope"); !errors.Is(err, storage.ErrNotFound) {
		t.Errorf("error %v, want ErrNotFound", err)
	}
}

// Ensure that a damaged record or index entry gives ErrCorrupt, not a
// panic or a silently shorter history.
func TestCalibration_Corrupt(t *testing.T) {
	path := filepath.Join(t.TempDir(), "cal.db")
	s, err := storage.Open(path, storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	day := time.Date(2026, 12, 1, 9, 0, 0, 0, time.UTC)
	idA, _ := s.PutCalibration(calRecord("n_fore", day))
	idB, err := s.PutCalibration(calRecord("n_aft", day))
	if err != nil {
		t.Fatal(err)
	}
	s.Close()

	db, err := bolt.Open(path, 0o600, &bolt.Options{Timeout: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		cal := tx.Bucket([]byte("cal"))
		if err := cal.Bucket([]byte("rec")).Put([]byte(idA), []byte(`{"channel":"n_fore","fit":{"poly":"x"`)); err != nil {
			return err
		}
		return cal.Bucket([]byte("rec")).Delete([]byte(idB))
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}

	s2 := MustOpenStoreAt(t, path, storage.Options{})
	if _, err := s2.Calibration(idA); !errors.Is(err, storage.ErrCorrupt) {
		t.Errorf("damaged record: %v, want ErrCorrupt", err)
	}
	if _, err := s2.Calibrations("n_fore"); !errors.Is(err, storage.ErrCorrupt) {
		t.Errorf("history with a damaged record: %v, want ErrCorrupt", err)
	}
	if _, err := s2.Calibrations("n_aft"); !errors.Is(err, storage.ErrCorrupt) || !strings.Contains(err.Error(), idB) {
		t.Errorf("index naming a missing record: %v, want ErrCorrupt naming %s", err, idB)
	}
}

// Ensure that a run keeps the list of calibration ids it used, and that
// runs without a list and unknown runs answer as documented.
func TestRunCalibrations(t *testing.T) {
	s := MustOpenStore(t)
	id, err := s.CreateRun(storage.Run{Rig: "tow", AreaM2: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	got, err := s.RunCalibrations(id)
	if err != nil || got == nil || len(got) != 0 {
		t.Errorf("run without a list: %v, %v", got, err)
	}
	want := []string{"n_fore-20261201-1", "n_aft-20261201-1"}
	if err := s.SetRunCalibrations(id, want); err != nil {
		t.Fatal(err)
	}
	if got, err = s.RunCalibrations(id); err != nil || !reflect.DeepEqual(got, want) {
		t.Errorf("run calibrations %v, %v; want %v", got, err, want)
	}
	if err := s.SetRunCalibrations(99, want); !errors.Is(err, storage.ErrNotFound) {
		t.Errorf("unknown run: %v, want ErrNotFound", err)
	}
	if _, err := s.RunCalibrations(99); !errors.Is(err, storage.ErrNotFound) {
		t.Errorf("unknown run: %v, want ErrNotFound", err)
	}
}
