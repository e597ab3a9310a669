namespace RewriteProxy.Tests.Cache;

/// <summary>
/// Gradient-boosted regression trees for a binary label with the logistic loss, second-order leaf values (Friedman,
/// Greedy Function Approximation: A Gradient Boosting Machine, 2001; the Newton step as in Chen and Guestrin, XGBoost,
/// 2016). Tiny and deterministic: exhaustive splits on midpoints, no sampling.
/// </summary>
public sealed record BoostedTrees(double Bias, IReadOnlyList<BoostedTrees.Node[]> Trees)
{
    /// <summary>A split (Feature ≥ 0) or a leaf (Feature = -1, Value).</summary>
    public readonly record struct Node(int Feature, double Threshold, int Left, int Right, double Value);

    public double Probability(double[] x)
    {
        var z = Bias;
        foreach (var tree in Trees)
        {
            var n = 0;
            while (tree[n].Feature >= 0) n = x[tree[n].Feature] < tree[n].Threshold ? tree[n].Left : tree[n].Right;
            z += tree[n].Value;
        }
        return 1 / (1 + Math.Exp(-z));
    }

    public static BoostedTrees Fit(IReadOnlyList<double[]> x, IReadOnlyList<bool> y, IReadOnlyList<double> w, int rounds, int depth, double rate,
        double minLeafWeight, double lambda)
    {
        var total = w.Sum();
        var pos = Enumerable.Range(0, x.Count).Where(i => y[i]).Sum(i => w[i]);
        var bias = Math.Log(pos / (total - pos));
        var z = Enumerable.Repeat(bias, x.Count).ToArray();
        var trees = new List<Node[]>();
        for (var r = 0; r < rounds; r++)
        {
            var g = new double[x.Count];
            var h = new double[x.Count];
            for (var i = 0; i < x.Count; i++)
            {
                var p = 1 / (1 + Math.Exp(-z[i]));
                g[i] = w[i] * (p - (y[i] ? 1 : 0));
                h[i] = w[i] * p * (1 - p);
            }
            var nodes = new List<Node>();
            Grow(nodes, Enumerable.Range(0, x.Count).ToArray(), 0);
            var tree = nodes.ToArray();
            trees.Add(tree);
            for (var i = 0; i < x.Count; i++)
            {
                var n = 0;
                while (tree[n].Feature >= 0) n = x[i][tree[n].Feature] < tree[n].Threshold ? tree[n].Left : tree[n].Right;
                z[i] += tree[n].Value;
            }

            int Grow(List<Node> into, int[] rows, int level)
            {
                var at = into.Count;
                into.Add(default);
                double sumG = rows.Sum(i => g[i]), sumH = rows.Sum(i => h[i]);
                var best = (Gain: 0.0, Feature: -1, Threshold: 0.0);
                if (level < depth)
                    for (var f = 0; f < x[0].Length; f++)
                    {
                        var sorted = rows.OrderBy(i => x[i][f]).ThenBy(i => i).ToArray();
                        double gl = 0, hl = 0;
                        for (var k = 0; k < sorted.Length - 1; k++)
                        {
                            gl += g[sorted[k]];
                            hl += h[sorted[k]];
                            var a = x[sorted[k]][f];
                            var b = x[sorted[k + 1]][f];
                            if (a == b || hl < minLeafWeight || sumH - hl < minLeafWeight) continue;
                            var gain = gl * gl / (hl + lambda) + (sumG - gl) * (sumG - gl) / (sumH - hl + lambda) - sumG * sumG / (sumH + lambda);
                            if (gain > best.Gain + 1e-12) best = (gain, f, (a + b) / 2);
                        }
                    }
                if (best.Feature < 0)
                {
                    into[at] = new Node(-1, 0, 0, 0, -rate * sumG / (sumH + lambda));
                    return at;
                }
                var left = Grow(into, rows.Where(i => x[i][best.Feature] < best.Threshold).ToArray(), level + 1);
                var right = Grow(into, rows.Where(i => x[i][best.Feature] >= best.Threshold).ToArray(), level + 1);
                into[at] = new Node(best.Feature, best.Threshold, left, right, 0);
                return at;
            }
        }
        return new BoostedTrees(bias, trees);
    }
}
