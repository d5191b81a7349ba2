package detect

import (
	"fmt"
	"math"
	"os"

	"quietband/ingest"
)

type dbgObs struct{}

func (dbgObs) Begin(c *ingest.Capture, blockLen, fftSize int) {}
func (dbgObs) Block(in *BlockInput, fs []Finding) {
	if os.Getenv("DBGOBS") == "" {
		return
	}
	fmt.Printf("block %d:", in.F.Start)
	for _, x := range fs {
		if x.Class == "" && x.Detector != "pulse" {
			continue
		}
		fmt.Printf(" [%s/%s %.0f Hz %.1f dB", x.Detector, x.Class, x.OffsetHz, 10*math.Log10(x.JN))
		if x.Sweep != nil {
			fmt.Printf(" T %.2fus span %.0f fit %.2f coh %.2f even %v duty %.2f", x.Sweep.PeriodS*1e6, x.Sweep.HighHz-x.Sweep.LowHz, x.Sweep.Fit, x.Sweep.Coherent, x.Sweep.Even, x.Sweep.Duty)
		}
		if x.Pulse != nil {
			fmt.Printf(" pri %.1fus n %d", x.Pulse.PRIS*1e6, x.Pulse.Pulses)
		}
		fmt.Print("]")
	}
	fmt.Println()
}
