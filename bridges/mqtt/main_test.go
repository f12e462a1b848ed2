package mqtt

import (
	"log"
	"os"
	"testing"

	paho "github.com/eclipse/paho.mqtt.golang"
)

// TestMain turns on paho's own debug log when GAITRIG_PAHO_DEBUG=1, for
// diagnosing a failing link test.
func TestMain(m *testing.M) {
	if os.Getenv("GAITRIG_PAHO_DEBUG") == "1" {
		paho.DEBUG = log.New(os.Stderr, "PAHO ", log.Lmicroseconds)
		paho.ERROR = log.New(os.Stderr, "PAHOERR ", log.Lmicroseconds)
	}
	os.Exit(m.Run())
}
