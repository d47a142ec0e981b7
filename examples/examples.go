// Package examples embeds lagstar's bundled, invented example data sets.
//
// sleepdiary is an invented nurses' sleep diary: 120 nurses answered two
// items every evening for up to 42 days, "How rested did you feel today?"
// (1 = not at all .. 5 = fully) and "Did you have a headache today?"
// (no/yes). Rows are unsorted, some days are skipped, some nurses stopped
// early and some cells are empty, as in real diaries. The values were drawn
// from a random-intercept cross-lagged model by TestGenerateSleepDiary
// (examples_test.go); they describe no real person.
package examples

import "embed"

//go:embed sleepdiary/model.yaml sleepdiary/diary.csv wristpain/model.yaml wristpain/staff.csv
var files embed.FS

// SleepDiary returns the model file and data of the sleep-diary example.
func SleepDiary() (modelYAML, dataCSV []byte) {
	return pair("sleepdiary/model.yaml", "sleepdiary/diary.csv")
}

// WristPain returns the model file and the wide-layout data of the
// wrist-pain example.
func WristPain() (modelYAML, dataCSV []byte) {
	return pair("wristpain/model.yaml", "wristpain/staff.csv")
}

// pair reads an example's model file and data from the embedded files.
func pair(modelFile, dataFile string) ([]byte, []byte) {
	m, err := files.ReadFile(modelFile)
	if err != nil {
		panic("examples: " + err.Error())
	}
	d, err := files.ReadFile(dataFile)
	if err != nil {
		panic("examples: " + err.Error())
	}
	return m, d
}
