// Package analysis turns an assembled diffusion series into the physics the
// rules judge: trace images per b-value, ADC and eADC maps, a tissue
// mask, and per-series measures (parenchyma median ADC, CSF ADC, the
// shares of tissue above the free-water ceiling and below zero, b0 and
// high-b SNR).
//
// The parts fit like this: package audit/header reads the headers and
// pixels, package audit/dwi assembles volumes on a common slice grid; Analyze (this
// package) picks the reference and high-b volumes, builds the traces and
// calls package audit/adc, which holds the arithmetic on plain slices;
// the rules read Result.Measures and the maps. Physics and check values
// are those of docs/references.md, cited beside each default.
//
// The audit checks acquisitions; it does not diagnose. Clinical
// decisions rest with the radiologist and local policy.
package analysis
