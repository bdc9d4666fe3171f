package mqtt_test

import (
	"context"
	"errors"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/mqtt"
	"liftyard/internal/mosquittotest"
	"liftyard/rig"
)

// runUntilRefused runs src and expects Run to end with a refusal quickly.
func runUntilRefused(t *testing.T, src *mqtt.Source) error {
	t.Helper()
	ctx, cancel := context.WithTimeout(t.Context(), 10*time.Second)
	defer cancel()
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, make(chan acquire.Block, 1)) }()
	select {
	case err := <-done:
		require.Error(t, err, "Run ended without an error")
		return err
	case <-ctx.Done():
		t.Fatal("Run kept retrying a connection the broker refuses")
		return nil
	}
}

// roundTrip publishes one block through pub and waits for it at r.
func roundTrip(t *testing.T, ctx context.Context, r *running, pub *mqtt.Publisher) {
	t.Helper()
	in := make(chan acquire.Block, 1)
	in <- block(7)
	close(in)
	require.NoError(t, pub.Run(ctx, in))
	assert.Equal(t, []uint64{7}, r.next(t, ctx, 1))
}

// Ensure that a broker with a password file admits the source with the
// password from the environment variable the rig names, and that a wrong
// password ends Run with an error that says what to check and does not
// contain the password.
func TestCredentials_PasswordFile(t *testing.T) {
	tool, err := exec.LookPath("mosquitto_passwd")
	if err != nil {
		// mosquitto_passwd ships in Debian's mosquitto package itself.
		t.Skip("mosquitto_passwd not installed (it comes with the mosquitto package)")
	}
	pwFile := filepath.Join(t.TempDir(), "passwd")
	out, err := exec.Command(tool, "-b", "-c", pwFile, "logger", "right-horse-battery").CombinedOutput()
	require.NoError(t, err, "mosquitto_passwd: %s", out)
	br := mosquittotest.Start(t, mosquittotest.Config("allow_anonymous false", "password_file "+pwFile))
	ctx, cancel := context.WithTimeout(t.Context(), 15*time.Second)
	defer cancel()

	table := rig.Source{Name: "node", Type: "mqtt", Broker: br.URL(), Topic: "cred/raw", Username: "logger", PasswordEnv: "LIFTYARD_TEST_PW"}
	good := func(k string) string { return map[string]string{"LIFTYARD_TEST_PW": "right-horse-battery"}[k] }
	bad := func(k string) string { return map[string]string{"LIFTYARD_TEST_PW": "wrong-staple"}[k] }

	src, err := mqtt.FromRig(table, "tank", good)
	require.NoError(t, err)
	r := runSource(t, ctx, src)
	roundTrip(t, ctx, r, &mqtt.Publisher{Broker: br.URL(), Topic: "cred/raw", ClientID: "cred-pub", Username: "logger", Password: "right-horse-battery"})

	wrong, err := mqtt.FromRig(table, "tank2", bad)
	require.NoError(t, err)
	err = runUntilRefused(t, wrong)
	assert.True(t, errors.Is(err, mqtt.ErrRefused), "%v", err)
	assert.Contains(t, err.Error(), "not Authorized")
	assert.Contains(t, err.Error(), "check username and the password environment variable")
	assert.NotContains(t, err.Error(), "wrong-staple")

	anon := &mqtt.Source{Name: "anon", Broker: br.URL(), Topic: "cred/raw"}
	assert.ErrorIs(t, runUntilRefused(t, anon), mqtt.ErrRefused)
}

// Ensure that a TLS listener with a CA made in the test works with the CA
// file from the rig, and refuses (with a hint to set ca_file) without it.
func TestTLS_CAFile(t *testing.T) {
	ca := writeCA(t, t.TempDir())
	br := mosquittotest.Start(t, mosquittotest.Config("cafile "+ca.caFile, "certfile "+ca.certFile, "keyfile "+ca.keyFile))
	url := strings.Replace(br.URL(), "tcp://", "mqtts://", 1)
	ctx, cancel := context.WithTimeout(t.Context(), 15*time.Second)
	defer cancel()

	src, err := mqtt.FromRig(rig.Source{Name: "node", Broker: url, Topic: "tls/raw", CAFile: ca.caFile}, "tank", nil)
	require.NoError(t, err)
	require.True(t, strings.HasPrefix(src.Broker, "ssl://"))
	r := runSource(t, ctx, src)
	tlsCfg, err := mqtt.TLSConfig(ca.caFile)
	require.NoError(t, err)
	roundTrip(t, ctx, r, &mqtt.Publisher{Broker: url, Topic: "tls/raw", ClientID: "tls-pub", TLS: tlsCfg})

	noCA, err := mqtt.FromRig(rig.Source{Name: "node2", Broker: url, Topic: "tls/raw"}, "tank", nil)
	require.NoError(t, err)
	err = runUntilRefused(t, noCA)
	assert.ErrorIs(t, err, mqtt.ErrRefused)
	assert.Contains(t, err.Error(), "certificate signed by unknown authority")
	assert.Contains(t, err.Error(), "set ca_file")

	// Plain TCP to a TLS listener is not a refusal: it is retried, and
	// Run ends cleanly when the context does.
	plain := &mqtt.Source{Name: "plain", Broker: br.URL(), Topic: "tls/raw"}
	pctx, pcancel := context.WithTimeout(ctx, 1500*time.Millisecond)
	defer pcancel()
	assert.NoError(t, plain.Run(pctx, make(chan acquire.Block, 1)))
	assert.Zero(t, plain.Subscriptions())
}
