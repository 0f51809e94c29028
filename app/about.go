package main

import "dosecover/dosemap"

var version = dosemap.Version

// cautionText is shown in the About box and by "dosecover help"; reports
// carry the same cautions.
const cautionText = `Cautions: dosecover is for retrospective review, quality assurance and
teaching. It is not a treatment planning or treatment delivery system and must
not guide a treatment. Lethal thresholds are literature values that vary by
tissue; thermometry artefacts (motion, drift, susceptibility, fat) make dose
maps wrong. Defer to local protocols and licensed clinical practice.`
