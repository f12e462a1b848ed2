package main

import (
	_ "github.com/creack/pty"
	_ "github.com/eclipse/paho.mqtt.golang"
	_ "github.com/goccy/go-yaml"
	_ "github.com/mochi-mqtt/server/v2"
	_ "github.com/parquet-go/parquet-go"
	_ "github.com/rs/zerolog"
	_ "github.com/schollz/progressbar/v3"
	_ "go.bug.st/serial"
	_ "gonum.org/v1/gonum/mat"
	_ "gonum.org/v1/plot"
)

func main() {}
