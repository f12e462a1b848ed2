package main
import (
 _ "go.bug.st/serial"
 _ "github.com/creack/pty"
 _ "github.com/eclipse/paho.mqtt.golang"
 _ "github.com/mochi-mqtt/server/v2"
 _ "github.com/rs/zerolog"
 _ "gonum.org/v1/gonum/mat"
 _ "gonum.org/v1/plot"
 _ "github.com/goccy/go-yaml"
 _ "github.com/parquet-go/parquet-go"
 _ "github.com/schollz/progressbar/v3"
)
func main(){}
