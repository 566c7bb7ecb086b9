package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/rs/zerolog"
	"golang.org/x/sync/errgroup"

	"plumbline/daemon/config"
	"plumbline/daemon/pipeline"
	"plumbline/ingest/filestore"
	"plumbline/ingest/readfile"
	"plumbline/ingest/source"
	"plumbline/ingest/spool"
	"plumbline/ingest/store"
)

// fileStoreDir is where the embedded file store lives under data_dir.
func fileStoreDir(c *config.Config) string { return filepath.Join(c.DataDir, "store") }

// storeConfig is the InfluxDB client configuration of c, with the token
// read from its file.
func storeConfig(c *config.Config) (store.Config, error) {
	sc := store.Config{URL: c.Store.URL, Org: c.Store.Org, Bucket: c.Store.Bucket, CreateDatabase: true}
	if c.Store.TokenFile != "" {
		b, err := os.ReadFile(c.Store.TokenFile)
		if err != nil {
			return sc, fmt.Errorf("store token: %w", err)
		}
		sc.Token = strings.TrimSpace(string(b))
	}
	return sc, nil
}

// openSource opens where a retrospective run reads from: a readings file
// (CSV or line protocol) or "store", the configured store.
func openSource(c *config.Config, spec string) (source.Source, func(), error) {
	if spec == "" || spec == "store" {
		if c.Store.Embedded() {
			fs, err := filestore.Open(fileStoreDir(c), filestore.Options{})
			if err != nil {
				return nil, nil, err
			}
			return fs, func() { fs.Close() }, nil
		}
		sc, err := storeConfig(c)
		if err != nil {
			return nil, nil, err
		}
		src, err := store.NewSource(sc)
		if err != nil {
			return nil, nil, err
		}
		return src, src.Close, nil
	}
	f, err := readfile.Open(spec, readfile.Options{Sensors: c.Sensors})
	if err != nil {
		return nil, nil, err
	}
	return f, func() {}, nil
}

// resultSink is where result points go: the embedded file store, or the
// InfluxDB writer behind its durable spool, drained by a goroutine owned
// here until Close.
type resultSink struct {
	pipeline.PointSink
	close func(ctx context.Context) error
}

// openSink opens the configured store for writing. name keeps the spools
// of concurrent runs (the service, a replay) apart.
func openSink(ctx context.Context, c *config.Config, name string, log zerolog.Logger) (*resultSink, error) {
	if c.Store.Embedded() {
		fs, err := filestore.Open(fileStoreDir(c), filestore.Options{})
		if err != nil {
			return nil, err
		}
		return &resultSink{PointSink: fs, close: func(context.Context) error { return fs.Close() }}, nil
	}
	sc, err := storeConfig(c)
	if err != nil {
		return nil, err
	}
	sp, _, err := spool.Open(filepath.Join(c.DataDir, "spool-"+name), spool.Options{})
	if err != nil {
		return nil, err
	}
	w, err := store.NewWriter(sc, sp, log)
	if err != nil {
		sp.Close()
		return nil, err
	}
	runCtx, cancel := context.WithCancel(context.WithoutCancel(ctx))
	g, gctx := errgroup.WithContext(runCtx)
	g.Go(func() error { return w.Run(gctx) })
	return &resultSink{PointSink: w, close: func(dctx context.Context) error {
		derr := w.Drain(dctx)
		cancel()
		if err := g.Wait(); err != nil && !errors.Is(err, context.Canceled) {
			derr = errors.Join(derr, err)
		}
		w.Close()
		return errors.Join(derr, sp.Close())
	}}, nil
}
