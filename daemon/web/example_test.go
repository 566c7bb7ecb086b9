package web_test

import (
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"

	"github.com/rs/zerolog"

	"plumbline/daemon/web"
	"plumbline/model/network"
)

// service stands for the running service: it knows its state and health.
type service struct{ connected bool }

func (s *service) View() web.View { return web.View{} }

func (s *service) Ready() (bool, []string) {
	if !s.connected {
		return false, []string{"MQTT broker not connected"}
	}
	return true, nil
}

func (s *service) WriteMetrics(w io.Writer) error {
	_, err := io.WriteString(w, "# TYPE plumbline_readings_accepted_total counter\nplumbline_readings_accepted_total 0\n")
	return err
}

// The service mounts the handler on its listener; the alerts API
// (alerts.NewAPI) goes in as the third argument, nil here.
func ExampleNewHandler() {
	net := network.New(nil, nil)
	h := web.NewHandler(net, &service{}, nil, zerolog.Nop())

	w := httptest.NewRecorder()
	h.ServeHTTP(w, httptest.NewRequest(http.MethodGet, "/readyz", nil))
	fmt.Print(w.Code, " ", w.Body.String())
	// Output:
	// 503 {"ready":false,"reasons":["MQTT broker not connected"]}
}
