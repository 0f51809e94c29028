package deid_test

import (
	"fmt"

	"dosecover/dosemap/deid"
)

func ExampleDeidentifier_UID() {
	d, err := deid.New(deid.Options{Salt: "example salt"})
	if err != nil {
		fmt.Println(err)
		return
	}
	a := d.UID("1.2.826.0.1.3680043.99.7")
	fmt.Println(a[:5], len(a) <= 64, a == d.UID("1.2.826.0.1.3680043.99.7"))
	// Standard UIDs (SOP classes, transfer syntaxes) are kept.
	fmt.Println(d.UID("1.2.840.10008.5.1.4.1.1.4"))
	// Output:
	// 2.25. true true
	// 1.2.840.10008.5.1.4.1.1.4
}
