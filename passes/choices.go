package passes

import (
	"fmt"
	"io"
	"strings"
)

// choicesIntro says what the choice table holds.
const choicesIntro = "Choices of the selection, each with its runner-up: the best variant that decides otherwise (its other differences follow in parentheses), compiled and priced with the same profile."

// ChoicesMarkdown renders the selection's choices as a Markdown table, ""
// when there were none.
func (p *Plan) ChoicesMarkdown() string {
	if len(p.Choices) == 0 {
		return ""
	}
	var b strings.Builder
	fmt.Fprintf(&b, "%s\n\n| decision | chosen | est. ms | keys MB | runner-up | est. ms | keys MB |\n|---|---|---|---|---|---|---|\n", choicesIntro)
	for _, c := range p.Choices {
		ru, ms, mb := runnerUpCells(c)
		fmt.Fprintf(&b, "| %s | %s | %.1f | %.1f | %s | %s | %s |\n", c.Decision, c.Chosen, c.ChosenMS, float64(c.ChosenKeyBytes)/1e6, ru, ms, mb)
	}
	return b.String()
}

// WriteChoicesText writes the selection's choices for a terminal, one a
// line.
func (p *Plan) WriteChoicesText(w io.Writer) error {
	if len(p.Choices) == 0 {
		return nil
	}
	if _, err := fmt.Fprintf(w, "\n%s\n", choicesIntro); err != nil {
		return err
	}
	for _, c := range p.Choices {
		ru, ms, mb := runnerUpCells(c)
		if c.RunnerUp != "" && c.RunnerUpErr == "" {
			ru += fmt.Sprintf(" (%s ms, keys %s MB)", ms, mb)
		}
		if _, err := fmt.Fprintf(w, "  %s: %s (%.1f ms, keys %.1f MB); runner-up: %s\n",
			c.Decision, c.Chosen, c.ChosenMS, float64(c.ChosenKeyBytes)/1e6, ru); err != nil {
			return err
		}
	}
	return nil
}

func runnerUpCells(c Choice) (what, ms, mb string) {
	switch {
	case c.RunnerUp == "":
		return "none (no other variant)", "-", "-"
	case c.RunnerUpErr != "":
		return c.RunnerUp + " (does not compile: " + c.RunnerUpErr + ")", "-", "-"
	}
	return c.RunnerUp, fmt.Sprintf("%.1f", c.RunnerUpMS), fmt.Sprintf("%.1f", float64(c.RunnerUpKeyBytes)/1e6)
}
