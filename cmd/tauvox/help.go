package main

import (
	"embed"
	"fmt"
	"io"
	"sort"
	"strings"

	"github.com/tauvox/tauvox/fit"
)

// helpFiles holds the texts of `tauvox help TOPIC`, one file per topic
// (cmd/tauvox/help/TOPIC.txt); "models" is made from the model registry.
//
//go:embed help/*.txt
var helpFiles embed.FS

// helpTopics returns the topic names, sorted.
func helpTopics() []string {
	names := []string{"models"}
	ents, _ := helpFiles.ReadDir("help")
	for _, e := range ents {
		names = append(names, strings.TrimSuffix(e.Name(), ".txt"))
	}
	sort.Strings(names)
	return names
}

// helpTopic prints the text of a topic and reports whether there is one.
func helpTopic(name string, w io.Writer) bool {
	if name == "model" {
		name = "models"
	}
	if name == "models" {
		fmt.Fprintln(w, "Models (tauvox fit --model M; tauvox fit --model M --help for one)")
		fmt.Fprintln(w)
		fmt.Fprint(w, modelList())
		var bySuffix []string
		for _, m := range fit.Models() {
			for _, s := range m.Suffixes {
				bySuffix = append(bySuffix, s+" "+m.Name)
			}
		}
		fmt.Fprintln(w, "\nSuggested per series by tauvox scan; per BIDS suffix by tauvox batch")
		fmt.Fprintf(w, "(%s). Equations and sources: docs/methods.md.\n", strings.Join(bySuffix, ", "))
		return true
	}
	b, err := helpFiles.ReadFile("help/" + name + ".txt")
	if err != nil {
		return false
	}
	w.Write(b)
	return true
}

// helpTopicsLine is the line of the usage text that lists the topics.
func helpTopicsLine() string {
	return "Topics: tauvox help " + strings.Join(helpTopics(), "|")
}

// modelTable is the model table of docs/methods.md, made from the
// registry (a test keeps the document in step; go test -update rewrites it).
func modelTable() string {
	var b strings.Builder
	b.WriteString("| model | methods | varies | options | BIDS suffix (batch) | reference |\n| --- | --- | --- | --- | --- | --- |\n")
	for _, m := range fit.Models() {
		opts := "–"
		if len(m.Options) > 0 {
			opts = "`--" + strings.Join(m.Options, "`, `--") + "`"
		}
		suffix := "–"
		if len(m.Suffixes) > 0 {
			suffix = strings.Join(m.Suffixes, ", ")
		}
		fmt.Fprintf(&b, "| `%s` | %s | %s | %s | %s | %s |\n", m.Name, strings.Join(m.Methods, ", "), m.Needs, opts, suffix, m.Reference)
	}
	return b.String()
}
