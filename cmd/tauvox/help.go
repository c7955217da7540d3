package main

import (
	"embed"
	"fmt"
	"io"
	"sort"
	"strings"
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
	if name == "models" {
		fmt.Fprintln(w, "Models (tauvox fit --model M; tauvox fit --model M --help for one)")
		fmt.Fprintln(w)
		fmt.Fprint(w, modelList())
		fmt.Fprintln(w, "\nSuggested per series by tauvox scan; per BIDS suffix by tauvox batch")
		fmt.Fprintln(w, "(MESE t2, MEGRE t2star, IRT1 t1-ir, VFA t1-vfa). Equations and sources:")
		fmt.Fprintln(w, "docs/methods.md.")
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
