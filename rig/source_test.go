package rig_test

import (
	"errors"
	"os"
	"slices"
	"strings"
	"testing"

	"liftyard/rig"
)

// sourceRig is a small foil rig whose [[source]] and extra tables the cases
// below fill in (an invented scenario).
const sourceRigHead = `name = "t"
kind = "foil"
fluid = "air"
[reference]
area_m2 = 0.1
length_m = 0.2
[[channel]]
name = "n"
quantity = "force"
unit = "N"
capacity = "100 N"
raw_range = [-8388608, 8388607]
calibration = { poly = [0, 0.001], u = 0.1 }
[[channel]]
name = "q"
quantity = "pressure"
unit = "Pa"
capacity = "1 kPa"
calibration = { poly = [0, 1], u = 1 }
[lift]
normal = ["n"]
angle = 4.0
dynamic_pressure = "q"
`

// Ensure that serial line settings, delimited columns, MQTT credentials by
// environment variable, raw ranges and the [publish] table parse (issue 4).
func TestParse_SourceSettings(t *testing.T) {
	src := sourceRigHead + `
[[source]]
name = "amp"
type = "serial"
port = "/dev/serial/by-id/usb-amp"
baud = 57600
data_bits = 7
parity = "even"
stop_bits = 2
format = "delimited"
delimiter = ";"
columns = ["t_ms", "n", "_", "q"]

[publish]
broker = "ssl://site:8883"
topic_prefix = "yard/rig1"
username = "logger"
password_env = "LIFTYARD_SITE_PASSWORD"
ca_file = "/etc/ssl/site-ca.pem"
`
	r, err := rig.Parse("s.toml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	s := r.Sources[0]
	if s.Baud != 57600 || s.DataBits != 7 || s.Parity != "even" || s.StopBits != 2 || s.Delimiter != ";" {
		t.Errorf("serial settings = %+v", s)
	}
	if strings.Join(s.Columns, ",") != "t_ms,n,_,q" {
		t.Errorf("columns = %v", s.Columns)
	}
	if c, _ := r.Channel("n"); c.RawMin != -8388608 || c.RawMax != 8388607 {
		t.Errorf("raw range = %v %v", c.RawMin, c.RawMax)
	}
	if p := r.Publish; p == nil || p.Broker != "ssl://site:8883" || p.TopicPrefix != "yard/rig1" || p.PasswordEnv != "LIFTYARD_SITE_PASSWORD" {
		t.Errorf("publish = %+v", r.Publish)
	}
	// The round trip through Format keeps every new field.
	r2, err := rig.Parse("f.toml", rig.Format(r))
	if err != nil {
		t.Fatalf("formatted rig does not parse: %v\n%s", err, rig.Format(r))
	}
	if r2.Sources[0].Delimiter != ";" || r2.Publish.CAFile != "/etc/ssl/site-ca.pem" {
		t.Errorf("round trip lost settings: %+v %+v", r2.Sources[0], r2.Publish)
	}

	// Serial defaults: 8 data bits, no parity, 1 stop bit, "," for delimited.
	r, err = rig.Parse("d.toml", []byte(sourceRigHead+`
[[source]]
name = "amp"
type = "serial"
port = "/dev/ttyUSB0"
format = "delimited"
columns = ["n", "q"]
`))
	if err != nil {
		t.Fatal(err)
	}
	if s := r.Sources[0]; s.DataBits != 8 || s.Parity != "none" || s.StopBits != 1 || s.Delimiter != "," || s.Baud != 115200 {
		t.Errorf("defaults = %+v", s)
	}
}

// Ensure that bad serial and publish settings are reported with their line.
func TestParse_SourceSettingsErrors(t *testing.T) {
	head := strings.Count(sourceRigHead, "\n")
	tests := []struct {
		name     string
		body     string
		line     int // line within body, from 1
		sentinel error
		msg      string
	}{
		{"parity", "[[source]]\nname = \"a\"\ntype = \"serial\"\nport = \"/dev/x\"\nchannels = [\"n\", \"q\"]\nparity = \"mark\"\n", 6, rig.ErrValue, `parity "mark" is not known`},
		{"stop bits", "[[source]]\nname = \"a\"\ntype = \"serial\"\nport = \"/dev/x\"\nchannels = [\"n\", \"q\"]\nstop_bits = 3\n", 6, rig.ErrValue, "stop_bits must be 1 or 2"},
		{"two time columns", "[[source]]\nname = \"a\"\ntype = \"serial\"\nport = \"/dev/x\"\nformat = \"delimited\"\ncolumns = [\"t_ms\", \"t_us\", \"n\", \"q\"]\n", 6, rig.ErrDuplicate, "more than one time column"},
		{"unknown column", "[[source]]\nname = \"a\"\ntype = \"serial\"\nport = \"/dev/x\"\nformat = \"delimited\"\ncolumns = [\"n\", \"qq\"]\n", 6, rig.ErrReference, `"qq"`},
		{"channels on delimited", "[[source]]\nname = \"a\"\ntype = \"serial\"\nport = \"/dev/x\"\nformat = \"delimited\"\nchannels = [\"n\", \"q\"]\n", 6, rig.ErrValue, "names its fields in columns"},
		{"password on serial", "[[source]]\nname = \"a\"\ntype = \"serial\"\nport = \"/dev/x\"\nchannels = [\"n\", \"q\"]\npassword_env = \"X\"\n", 6, rig.ErrValue, "password_env applies to mqtt sources only"},
		{"publish broker", "[[source]]\nname = \"a\"\ntype = \"serial\"\nport = \"/dev/x\"\nchannels = [\"n\", \"q\"]\n[publish]\nbroker = \"site:1883\"\ntopic_prefix = \"y\"\n", 7, rig.ErrValue, "needs a scheme, host and port"},
		{"minimal serial source is fine", "[[source]]\nname = \"a\"\ntype = \"serial\"\nport = \"/dev/x\"\nchannels = [\"n\", \"q\"]\n", 0, nil, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := rig.Parse("s.toml", []byte(sourceRigHead+tt.body))
			if tt.sentinel == nil {
				if err != nil {
					t.Fatalf("unexpected error: %v", err)
				}
				return
			}
			var errs rig.Errors
			if !errors.As(err, &errs) {
				t.Fatalf("error %v is not rig.Errors", err)
			}
			found := false
			for _, e := range errs {
				if errors.Is(e, tt.sentinel) && strings.Contains(e.Error(), tt.msg) {
					found = true
					if want := head + tt.line; e.Line != want {
						t.Errorf("line = %d, want %d (%v)", e.Line, want, e)
					}
				}
			}
			if !found {
				t.Errorf("no %v error containing %q in:\n%v", tt.sentinel, tt.msg, err)
			}
		})
	}
}

// Ensure that a roof zone without taps, and a zone named like the
// whole-roof result, are refused at their line (a zone with no taps would
// give no result; "roof" is the whole-roof row).
func TestParse_RoofZones(t *testing.T) {
	data, err := os.ReadFile("../testdata/rigs/roof-yard.toml")
	if err != nil {
		t.Fatal(err)
	}
	src := string(data) + "\n[[zone]]\nname = \"ridge\"\ndesign_cp = -1.0\ndesign_u = 0.2\n\n[[zone]]\nname = \"roof\"\ndesign_cp = -1.0\ndesign_u = 0.2\n"
	_, err = rig.Parse("roof.toml", []byte(src))
	var errs rig.Errors
	if !errors.As(err, &errs) {
		t.Fatalf("want rig.Errors, got %v", err)
	}
	text := err.Error()
	for _, want := range []string{`zone "ridge": no tap lies in this zone`, `zone "roof": the name "roof" is kept for the whole-roof result`} {
		if !strings.Contains(text, want) {
			t.Errorf("missing %q in:\n%s", want, text)
		}
	}
	for _, e := range errs {
		if e.Line == 0 {
			t.Errorf("problem without a line: %v", e)
		}
	}
}

// Ensure that Carried names the channels each kind of source lists, in
// wire order, and says when a source lists none (issue 15).
func TestSource_Carried(t *testing.T) {
	tests := []struct {
		name   string
		s      rig.Source
		want   []string
		listed bool
	}{
		{"frame", rig.Source{Type: rig.SourceSerial, Channels: []string{"b", "a"}}, []string{"b", "a"}, true},
		{"delimited", rig.Source{Type: rig.SourceSerial, Format: "delimited", Columns: []string{"t_ms", "n", "_", "q", "t_s"}}, []string{"n", "q"}, true},
		{"mqtt with channels", rig.Source{Type: rig.SourceMQTT, Channels: []string{"q"}}, []string{"q"}, true},
		{"mqtt without", rig.Source{Type: rig.SourceMQTT}, nil, false},
		{"simulated", rig.Source{Type: rig.SourceSimulated, Channels: []string{"q"}}, nil, false},
	}
	for _, tt := range tests {
		got, listed := tt.s.Carried()
		if !slices.Equal(got, tt.want) || listed != tt.listed {
			t.Errorf("%s: Carried() = %v, %v; want %v, %v", tt.name, got, listed, tt.want, tt.listed)
		}
	}
}
