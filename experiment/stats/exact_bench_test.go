package stats

import "testing"

// Benchmarks for the exact methods on millions of units (about 30 µs each
// on the development machine; a scan of every term would take tens of ms).

func BenchmarkFisherExactMillion(b *testing.B) {
	for i := 0; i < b.N; i++ {
		if _, err := FisherExact(500400, 1000000, 499000, 1000000, 0.05, TwoSided); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkBinomialExactMillion(b *testing.B) {
	for i := 0; i < b.N; i++ {
		if _, err := BinomialExact(499500, 1000000, 0.5, 0.05, TwoSided); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkClopperPearsonMillion(b *testing.B) {
	for i := 0; i < b.N; i++ {
		if _, err := ClopperPearson(20000, 2000000, 0.95); err != nil {
			b.Fatal(err)
		}
	}
}
