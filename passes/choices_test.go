package passes

import (
	"encoding/json"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// Plans show every decision with its runner-up and their costs: Markdown,
// text and JSON.
func TestPlanShowsChoices(t *testing.T) {
	g := selectionGraph(24)
	g.Layers[0] = banded("a", 64, []int{0, 8, 16, 24, 32}, 10)
	g.Layers[1] = banded("b", 64, []int{0, 1, 2, 3}, 20)
	g.Layers = append(g.Layers, short("d", 64, 4, 50))
	prof := DefaultProfile()
	_, st, _, err := Select(g, Options{}, prof, Latency)
	require.NoError(t, err)
	plan := MakePlan(st, prof)
	require.NotEmpty(t, plan.Choices)

	md := plan.Markdown()
	require.Contains(t, md, "| decision | chosen | est. ms | keys MB | runner-up | est. ms | keys MB |")
	var text strings.Builder
	require.NoError(t, plan.WriteChoicesText(&text))
	js, err := json.Marshal(plan)
	require.NoError(t, err)
	for _, c := range plan.Choices {
		require.Contains(t, md, "| "+c.Decision+" | "+c.Chosen+" |")
		require.Contains(t, text.String(), c.Decision+": "+c.Chosen)
		require.Contains(t, string(js), `"decision":"`+c.Decision+`"`)
		require.InDelta(t, plan.EstimateMS, c.ChosenMS, 1e-9)
		if c.RunnerUp != "" && c.RunnerUpErr == "" {
			require.GreaterOrEqual(t, c.RunnerUpMS, c.ChosenMS, c.Decision)
		}
	}
	require.Equal(t, "blocks", choiceOf(t, st, "c_d: method").Chosen)
	require.Contains(t, text.String(), "runner-up: ")
}
