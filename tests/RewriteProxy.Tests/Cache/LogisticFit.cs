namespace RewriteProxy.Tests.Cache;

/// <summary>
/// L2-regularised logistic regression fitted by Newton's method (iteratively reweighted least squares) on standardised
/// features: deterministic, so the same data always gives the same coefficients. The textbook method (Hastie, Tibshirani
/// and Friedman, The Elements of Statistical Learning, 2nd ed., section 4.4.1).
/// </summary>
public sealed record LogisticFit(double[] Mean, double[] Scale, double[] Weights, double Bias)
{
    /// <summary>Most Newton steps; it stops earlier once no coefficient moves by more than <see cref="Tolerance"/>.</summary>
    public const int Iterations = 50;

    public const double Tolerance = 1e-10;

    public double Probability(double[] x)
    {
        var z = Bias;
        for (var i = 0; i < x.Length; i++) z += Weights[i] * (x[i] - Mean[i]) / Scale[i];
        return 1 / (1 + Math.Exp(-z));
    }

    /// <summary>Fits on rows <paramref name="x"/> with labels <paramref name="y"/> (true = serve) and row weights; <paramref name="lambda"/> is the L2 penalty on the standardised weights (not the bias).</summary>
    public static LogisticFit Fit(IReadOnlyList<double[]> x, IReadOnlyList<bool> y, IReadOnlyList<double> w, double lambda)
    {
        var d = x[0].Length;
        var mean = new double[d];
        var scale = new double[d];
        var total = w.Sum();
        for (var j = 0; j < d; j++)
        {
            for (var i = 0; i < x.Count; i++) mean[j] += w[i] * x[i][j];
            mean[j] /= total;
            var v = 0.0;
            for (var i = 0; i < x.Count; i++) v += w[i] * (x[i][j] - mean[j]) * (x[i][j] - mean[j]);
            scale[j] = Math.Sqrt(v / total) is var sd && sd > 1e-9 ? sd : 1;
        }
        var z = x.Select(r => r.Select((v, j) => (v - mean[j]) / scale[j]).Append(1.0).ToArray()).ToList();
        var beta = new double[d + 1];
        for (var it = 0; it < Iterations; it++)
        {
            var grad = new double[d + 1];
            var hess = new double[d + 1, d + 1];
            for (var i = 0; i < z.Count; i++)
            {
                var s = 0.0;
                for (var j = 0; j <= d; j++) s += beta[j] * z[i][j];
                var p = 1 / (1 + Math.Exp(-s));
                var r = w[i] * ((y[i] ? 1 : 0) - p);
                var h = w[i] * p * (1 - p);
                for (var j = 0; j <= d; j++)
                {
                    grad[j] += r * z[i][j];
                    for (var k = 0; k <= j; k++) hess[j, k] += h * z[i][j] * z[i][k];
                }
            }
            for (var j = 0; j < d; j++)
            {
                grad[j] -= lambda * beta[j];
                hess[j, j] += lambda;
            }
            for (var j = 0; j <= d; j++)
                for (var k = j + 1; k <= d; k++) hess[j, k] = hess[k, j];
            var step = Solve(hess, grad);
            for (var j = 0; j <= d; j++) beta[j] += step[j];
            if (step.All(v => Math.Abs(v) < Tolerance)) break;
        }
        return new LogisticFit(mean, scale, beta[..d], beta[d]);
    }

    /// <summary>Gaussian elimination with partial pivoting; the matrix is small (one row per feature).</summary>
    static double[] Solve(double[,] a, double[] b)
    {
        var n = b.Length;
        var m = (double[,])a.Clone();
        var v = (double[])b.Clone();
        for (var c = 0; c < n; c++)
        {
            var pivot = c;
            for (var r = c + 1; r < n; r++) if (Math.Abs(m[r, c]) > Math.Abs(m[pivot, c])) pivot = r;
            if (pivot != c)
            {
                for (var k = 0; k < n; k++) (m[c, k], m[pivot, k]) = (m[pivot, k], m[c, k]);
                (v[c], v[pivot]) = (v[pivot], v[c]);
            }
            for (var r = c + 1; r < n; r++)
            {
                var f = m[r, c] / m[c, c];
                for (var k = c; k < n; k++) m[r, k] -= f * m[c, k];
                v[r] -= f * v[c];
            }
        }
        var x = new double[n];
        for (var r = n - 1; r >= 0; r--)
        {
            var s = v[r];
            for (var k = r + 1; k < n; k++) s -= m[r, k] * x[k];
            x[r] = s / m[r, r];
        }
        return x;
    }
}
