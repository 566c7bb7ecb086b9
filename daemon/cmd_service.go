package main

import (
	"context"
	"fmt"
	"io"
	"net/http"
	"os"

	"plumbline/daemon/config"
	"plumbline/daemon/service"
	"plumbline/daemon/web"
)

// runService implements `plumbline run`: the long-running service.
func runService(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("run", "--config F [--log-format json|console] [--log-level L] [--listen ADDR]", stderr)
	path := fs.String("config", "", "service configuration (YAML)")
	logFormat := fs.String("log-format", "", "json (default) or console")
	logLevel := fs.String("log-level", "", "debug, info, warn or error (default: the config's, else info)")
	listen := fs.String("listen", "", "HTTP address (default: the config's http.listen)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *path == "" {
		fs.Usage()
		return errUsage
	}
	cfg, err := config.LoadFile(*path)
	if err != nil {
		return err
	}
	if *logFormat == "" {
		*logFormat = cfg.Log.Format
	}
	if *logLevel == "" {
		*logLevel = cfg.Log.Level
	}
	log, err := newLogger(stderr, *logLevel, *logFormat)
	if err != nil {
		return err
	}
	svc, err := service.New(cfg, service.Options{Logger: log, Listen: *listen, Handler: webHandler})
	if err != nil {
		return err
	}
	log.Info().Str("config", *path).Int("sensors", len(cfg.Sensors)).Int("zones", len(cfg.Zones)).Msg("starting")
	if err := svc.Run(ctx); err != nil {
		fmt.Fprintln(os.Stderr, "plumbline run: stopped with errors:", err)
		return err
	}
	return nil
}

// webHandler is the HTTP surface of the service: health, readiness,
// metrics, the JSON API, the alert actions and the operator page.
func webHandler(s *service.Service) http.Handler {
	return web.NewHandler(s.Config().Network, s.WebProvider(), s.AlertsAPI(), s.Logger())
}
