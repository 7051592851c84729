package export

import (
	"math"
	"strings"
	"testing"

	"rolloff/sweep/analysis"
)

// TestReadCSVUncertainty: a file without a budget of its own declares
// each point's standard uncertainty by u_gain_db (dB) or u_vout_vrms (V);
// the analysis sees it as the point's Type A uncertainty, so its combined
// uncertainty in dB is the file's (d(20·log10 v) = 20/ln10 · dv/v,
// handbook calculus). A file with std_rel keeps its own budget.
func TestReadCSVUncertainty(t *testing.T) {
	pts, err := ReadCSV(strings.NewReader("frequency_hz,gain_db,u_gain_db\n100,-1,0.05\n200,-2,0.02\n"), "u.csv", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for i, want := range []float64{0.05, 0.02} {
		if got := analysis.PointBudget(pts[i]).CombinedDB; math.Abs(got-want) > 1e-12 {
			t.Errorf("row %d: combined %v dB, want the file's %v dB", i, got, want)
		}
	}
	pts, err = ReadCSV(strings.NewReader("frequency_hz,vin_vrms,vout_vrms,u_vout_vrms\n100,1,0.5,0.001\n"), "v.csv", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if got, want := analysis.PointBudget(pts[0]).TypeARel, 0.002; math.Abs(got-want) > 1e-12 {
		t.Errorf("u_vout_vrms 1 mV at 0.5 V: relative %v, want %v", got, want)
	}
	pts, err = ReadCSV(strings.NewReader("frequency_hz,gain_db,u_gain_db,std_rel\n100,-1,0.05,0.001\n"), "b.csv", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if pts[0].StdRel != 0.001 {
		t.Errorf("std_rel %v: want the file's 0.001", pts[0].StdRel)
	}
	if _, err := ReadCSV(strings.NewReader("frequency_hz,gain_db,u_gain_db\n100,-1,-0.05\n"), "n.csv", ReadOptions{}); err == nil || !strings.Contains(err.Error(), "u_gain_db") {
		t.Errorf("negative u_gain_db: error %v", err)
	}
}
