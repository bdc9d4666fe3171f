package mqtt

import (
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"log/slog"
	"net/url"
	"os"
	"strings"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/eclipse/paho.mqtt.golang/packets"

	"liftyard/rig"
)

// Connection timings shared by every client in this package. A field tool
// wants to notice a dead link within seconds and to be back soon after the
// broker is.
const (
	keepAlive            = 10 * time.Second
	pingTimeout          = 5 * time.Second
	connectTimeout       = 5 * time.Second
	connectRetryInterval = time.Second
	maxReconnectInterval = 5 * time.Second
)

// link is what every client needs to reach a broker.
type link struct {
	broker   string // URL as paho takes it
	clientID string
	username string
	password string
	tls      *tls.Config
}

// options returns paho options for a QoS 1 client with a persistent
// session, an ordered store, retry of the first connect and auto-reconnect.
func (l link) options() *paho.ClientOptions {
	o := paho.NewClientOptions().
		AddBroker(l.broker).SetClientID(l.clientID).
		SetUsername(l.username).SetPassword(l.password).
		SetCleanSession(false).SetOrderMatters(true).
		SetStore(paho.NewOrderedMemoryStore()).
		SetConnectRetry(true).SetConnectRetryInterval(connectRetryInterval).
		SetAutoReconnect(true).SetMaxReconnectInterval(maxReconnectInterval).
		SetKeepAlive(keepAlive).SetPingTimeout(pingTimeout).
		SetConnectTimeout(connectTimeout)
	if l.tls != nil {
		o.SetTLSConfig(l.tls)
	}
	return o
}

// BrokerURL checks a broker URL and returns it in the form paho takes:
// mqtt:// becomes tcp:// and mqtts:// becomes ssl://. It reports whether the
// link is TLS (ssl://, tls:// or mqtts://). A URL without a port gets the
// usual one, 1883 or 8883 (common practice, the IANA registrations for MQTT).
func BrokerURL(raw string) (string, bool, error) {
	u, err := url.Parse(raw)
	if err != nil || u.Host == "" {
		return "", false, fmt.Errorf("broker %q: want a URL like tcp://host:1883 or ssl://host:8883", rig.Excerpt(raw))
	}
	if u.User != nil {
		return "", false, fmt.Errorf("broker %q: no user name or password in the URL; use username and password_env", u.Redacted())
	}
	var isTLS bool
	switch strings.ToLower(u.Scheme) {
	case "tcp", "mqtt":
		u.Scheme = "tcp"
	case "ssl", "tls", "mqtts":
		u.Scheme, isTLS = "ssl", true
	default:
		return "", false, fmt.Errorf("broker %q: scheme %q not supported, use tcp:// or ssl:// (tls://, mqtts://)", rig.Excerpt(raw), rig.Excerpt(u.Scheme))
	}
	if u.Port() == "" {
		if isTLS {
			u.Host += ":8883"
		} else {
			u.Host += ":1883"
		}
	}
	return u.Scheme + "://" + u.Host, isTLS, nil
}

// TLSConfig returns a TLS client configuration that trusts the CA
// certificates in the PEM file caFile, or the system roots when caFile is
// empty. The error names the file when it cannot be read or holds no
// certificate.
func TLSConfig(caFile string) (*tls.Config, error) {
	cfg := &tls.Config{MinVersion: tls.VersionTLS12}
	if caFile == "" {
		return cfg, nil
	}
	pem, err := os.ReadFile(caFile)
	if err != nil {
		return nil, fmt.Errorf("CA file: %w", err)
	}
	pool := x509.NewCertPool()
	if !pool.AppendCertsFromPEM(pem) {
		return nil, fmt.Errorf("CA file %s: no PEM certificate in it (want -----BEGIN CERTIFICATE-----)", caFile)
	}
	cfg.RootCAs = pool
	return cfg, nil
}

// credentials reads the password named by passwordEnv and the CA file, and
// builds the link. what names the rig table for error messages.
func newLink(what, broker, clientID, username, passwordEnv, caFile string, getenv func(string) string) (link, error) {
	u, isTLS, err := BrokerURL(broker)
	if err != nil {
		return link{}, fmt.Errorf("%s: %w", what, err)
	}
	l := link{broker: u, clientID: clientID, username: username}
	if passwordEnv != "" {
		if getenv == nil {
			getenv = os.Getenv
		}
		l.password = getenv(passwordEnv)
		if l.password == "" {
			return link{}, fmt.Errorf("%s: password_env names %s, but that environment variable is empty or not set; export %s=... before starting", what, passwordEnv, passwordEnv)
		}
	}
	switch {
	case isTLS:
		if l.tls, err = TLSConfig(caFile); err != nil {
			return link{}, fmt.Errorf("%s: %w", what, err)
		}
	case caFile != "":
		return link{}, fmt.Errorf("%s: ca_file %s is set but broker %s is not TLS; use ssl://", what, caFile, broker)
	}
	return l, nil
}

// FromRig builds a Source from a rig [[source]] table of type mqtt.
// The client id defaults to "liftyard-<rig name>-<source name>", stable from
// run to run so the broker keeps the session. The password is read from the
// environment variable named by PasswordEnv (getenv nil means os.Getenv); it
// is never logged. An ssl://, tls:// or mqtts:// broker gets TLS with the CA
// in CAFile (system roots without one).
func FromRig(s rig.Source, rigName string, getenv func(string) string) (*Source, error) {
	id := s.ClientID
	if id == "" {
		id = "liftyard-" + rigName + "-" + s.Name
	}
	what := "source " + s.Name
	if s.Topic == "" {
		return nil, fmt.Errorf("%s: topic is required", what)
	}
	l, err := newLink(what, s.Broker, id, s.Username, s.PasswordEnv, s.CAFile, getenv)
	if err != nil {
		return nil, err
	}
	return &Source{
		Name: s.Name, Broker: l.broker, Topic: s.Topic, ClientID: id,
		Username: l.username, Password: l.password, TLS: l.tls,
	}, nil
}

// OutboxFromRig builds an Outbox for a rig's [publish] table. The client id
// defaults to "liftyard-publish-<rig name>".
func OutboxFromRig(p rig.Publish, rigName string, getenv func(string) string) (*Outbox, error) {
	id := p.ClientID
	if id == "" {
		id = "liftyard-publish-" + rigName
	}
	l, err := newLink("[publish]", p.Broker, id, p.Username, p.PasswordEnv, p.CAFile, getenv)
	if err != nil {
		return nil, err
	}
	return &Outbox{Broker: l.broker, ClientID: id, Username: l.username, Password: l.password, TLS: l.tls}, nil
}

// ErrRefused is returned by Run when the broker or its certificate refuses
// us before the first connection: wrong user name or password, not
// authorised, or a certificate we do not trust. Retrying cannot fix these.
var ErrRefused = errors.New("broker refused the connection")

// refusal tells whether a connect error is one that retrying will not fix,
// and says what to do about it.
func refusal(broker string, err error) error {
	var cve *tls.CertificateVerificationError
	var unknownCA x509.UnknownAuthorityError
	var host x509.HostnameError
	switch {
	case errors.Is(err, packets.ErrorRefusedBadUsernameOrPassword), errors.Is(err, packets.ErrorRefusedNotAuthorised):
		return fmt.Errorf("%w: %s: %v; check username and the password environment variable", ErrRefused, broker, err)
	case errors.As(err, &cve), errors.As(err, &unknownCA), errors.As(err, &host):
		return fmt.Errorf("%w: %s: TLS: %v; set ca_file to the PEM of the CA that signed the broker certificate", ErrRefused, broker, err)
	case errors.Is(err, packets.ErrorRefusedIDRejected):
		return fmt.Errorf("%w: %s: client id rejected; set client_id", ErrRefused, broker)
	}
	return nil
}

// refusalWatch returns a paho connection-notification handler that, until
// the first successful connection, sends connect errors that retrying cannot
// fix on fatal (without blocking) and logs the others at debug level.
func refusalWatch(broker string, fatal chan<- error, log *slog.Logger, everUp func() bool, failed func(error)) paho.ConnectionNotificationHandler {
	return func(_ paho.Client, n paho.ConnectionNotification) {
		var err error
		switch n := n.(type) {
		case paho.ConnectionNotificationBrokerFailed:
			err = n.Reason
		case paho.ConnectionNotificationFailed:
			err = n.Reason
		default:
			return
		}
		if r := refusal(broker, err); r != nil && !everUp() {
			select {
			case fatal <- r:
			default:
			}
			return
		}
		log.Debug("broker connect attempt failed", "broker", broker, "err", err)
		if failed != nil {
			failed(err)
		}
	}
}
