package qarun_test

import (
	"context"
	"fmt"
	"os"
	"time"

	"github.com/tauvox/tauvox/internal/qarun"
	"github.com/tauvox/tauvox/roi/phantom"
)

// The demo chain: two monthly sessions of the invented scanner, each
// simulated, fitted, assessed and recorded, then the history charted (too
// few sessions to judge). The dates, temperatures and verdicts are the
// first two that tauvox demo prints (a fixed seed).
func ExampleDemo() {
	dir, err := os.MkdirTemp("", "qarun-example")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)
	d := &qarun.Demo{Dir: dir, Sessions: 2, Version: "example", Done: func(n int, when time.Time, temp float64, qa *phantom.QA) {
		fmt.Printf("session %d, %s, %.1f °C: %s\n", n+1, when.Format("2006-01-02"), temp, qa.Verdict)
	}}
	r, err := d.Run(context.Background())
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(len(r.Series), "series;", r.Index.Summary)
	// Output:
	// session 1, 2026-01-10, 20.7 °C: pass
	// session 2, 2026-02-09, 22.6 °C: pass
	// 20 series; 20 of 20 series not judged: not enough sessions (2 of 5).
}
