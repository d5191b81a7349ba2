package gnss

import (
	"math"
	"math/rand/v2"
	"testing"

	"quietband/ingest/gpsca"
)

func TestDbgDop(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	for _, cn0 := range []float64{35, 38} {
		var errs []float64
		var cn []float64
		for i := 0; i < 30; i++ {
			s := randomSat(rng, 7, cn0, 5000)
			c := synthesize(rng, 4e6, gpsca.L1, 1, int(0.25*4e6), []satSpec{s})
			r := track(t, 4e6, gpsca.L1, []Acquired{perturbed(rng, s)}, c.x, 65536)
			errs = append(errs, math.Round((r[0].DopplerHz-s.dopplerHz)*10)/10)
			cn = append(cn, math.Round((r[0].CN0dBHz-cn0)*100)/100)
		}
		t.Log(cn0, errs)
		t.Log(cn0, cn)
	}
}
