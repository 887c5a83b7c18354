package metrics_test

import (
	"fmt"

	"splitledger/importance/metrics"
)

func ExampleNDCG() {
	// The printed values agree with scikit-learn 1.2.1 ndcg_score (linear
	// gain; labels 2^rel−1 for the exponential gain).
	// One query group: model scores and graded relevance labels.
	scores := []float64{2.1, 0.4, 1.7, 0.4}
	labels := []float64{0, 3, 1, 2}
	var scratch metrics.NDCGScratch
	fmt.Printf("NDCG@3 exponential: %.4f\n", metrics.NDCG(scores, labels, 3, metrics.GainExponential, &scratch))
	fmt.Printf("NDCG@3 linear:      %.4f\n", metrics.NDCG(scores, labels, 3, metrics.GainLinear, &scratch))
	// Output:
	// NDCG@3 exponential: 0.3333
	// NDCG@3 linear:      0.3950
}

func ExampleRanking() {
	// The printed values agree with scikit-learn 1.2.1 roc_auc_score.
	scores := []float64{0.9, 0.2, 0.6, 0.6, 0.1}
	labels := []float64{1, 0, 1, 0, 0}
	var r metrics.Ranking
	if err := r.Rank(scores, labels); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("AUC: %.4f\n", r.AUC(nil))
	// One bootstrap replicate: the third row drawn twice.
	fmt.Printf("AUC with counts: %.4f\n", r.AUCCounts([]uint8{1, 1, 2, 1, 1}))
	// Output:
	// AUC: 0.9167
	// AUC with counts: 0.8889
}

func ExampleLogLoss() {
	// The printed value agrees with scikit-learn 1.2.1 log_loss.
	labels := []float64{1, 0, 1}
	probs := []float64{0.8, 0.3, 1} // 1 is clipped to 1 − 2^−52
	fmt.Printf("%.4f\n", metrics.LogLoss(labels, probs, nil))
	// Output:
	// 0.1933
}
