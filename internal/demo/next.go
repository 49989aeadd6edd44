package demo

import (
	"fmt"
	"io"
	"path/filepath"
	"strings"
)

// NextCommands returns the commands a reader can run next on the demo's
// files, each starting with prog, the way to invoke hopwise ("hopwise" when
// installed, "go run ./cmd/hopwise" in a checkout). Every command runs as
// printed from the directory the demo ran in.
func (r *Report) NextCommands(prog string) []string {
	from, value, to := "zone-1/vent-a", "open", "bed-18/yield"
	if len(r.Explained) > 0 {
		from, value, to = r.Explained[0].From, r.Explained[0].Value, r.Explained[0].To
	}
	q := shellQuote
	cmds := []string{
		fmt.Sprintf("%s inspect --index %s --entity %s", prog, q(r.Files.Index), q(to)),
		fmt.Sprintf("%s route --index %s --from %s --value %s --to %s", prog, q(r.Files.Index), q(from), q(value), q(to)),
		fmt.Sprintf("%s route --index %s --queries %s", prog, q(r.Files.Index), q(r.Files.Queries)),
	}
	if len(r.Texts) > 0 {
		cmds = append(cmds,
			fmt.Sprintf("%s route --index %s --lexicon %s --text %s", prog, q(r.Files.Index), q(r.Files.Lexicon), q(r.Texts[0].Question)),
			fmt.Sprintf("%s route --index %s --lexicon %s --queries %s", prog, q(r.Files.Index), q(r.Files.Lexicon), q(r.Files.Questions)))
	}
	if r.Experiment.Decisions > 0 {
		tuned := filepath.Join(filepath.Dir(r.Files.Experiment), "tuned.json")
		cmds = append(cmds,
			fmt.Sprintf("%s tune --traces %s --out %s", prog, q(r.Files.Experiment), q(tuned)),
			fmt.Sprintf("%s ab --traces %s", prog, q(r.Files.Experiment)))
	}
	return append(cmds, prog+" eval")
}

// shellQuote returns s as one POSIX shell word: unchanged when it holds only
// characters no shell treats specially, else in single quotes (a single
// quote inside closes the quotes, adds an escaped quote and reopens them).
func shellQuote(s string) string {
	if s != "" && strings.IndexFunc(s, func(c rune) bool {
		return !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || strings.ContainsRune("-_./=:,+@%", c))
	}) < 0 {
		return s
	}
	return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'"
}

// WriteNext prints NextCommands under a "Next:" heading.
func (r *Report) WriteNext(out io.Writer, prog string) error {
	_, err := io.WriteString(out, "\nNext:\n  "+strings.Join(r.NextCommands(prog), "\n  ")+"\n")
	return err
}
