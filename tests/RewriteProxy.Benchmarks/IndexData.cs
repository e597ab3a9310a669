using System.Numerics.Tensors;

namespace RewriteProxy.Benchmarks;

/// <summary>
/// Clustered unit vectors standing in for question embeddings: random unit centres, each member the centre plus
/// Gaussian noise, renormalised. Noise of norm ≈ 0.75 puts members at cosine ≈ 0.8 to their centre and ≈ 0.64 to
/// each other (same topic, different question); a query is a stored vector plus noise of norm ≈ 0.3, cosine ≈ 0.96
/// to its source (a paraphrase). Uniform random vectors would make every pair ≈ 0 apart and the search trivial.
/// </summary>
internal static class IndexData
{
    public const float MemberNoise = 0.75f;
    public const float QueryNoise = 0.3f;

    /// <summary>About 250 members per centre, between 10 and 4000 centres.</summary>
    public static int CentresFor(int size) => Math.Clamp(size / 250, 10, 4000);

    public static float[][] Clustered(int size, int dimensions, int seed)
    {
        var random = new Random(seed);
        var centres = new float[CentresFor(size)][];
        for (var c = 0; c < centres.Length; c++) centres[c] = Around(null, 1f, dimensions, random);
        var rows = new float[size][];
        for (var i = 0; i < size; i++) rows[i] = Around(centres[random.Next(centres.Length)], MemberNoise, dimensions, random);
        return rows;
    }

    /// <summary>Queries: perturbed copies of randomly chosen stored rows.</summary>
    public static float[][] Queries(float[][] rows, int count, int seed)
    {
        var random = new Random(seed);
        var queries = new float[count][];
        for (var i = 0; i < count; i++) queries[i] = Around(rows[random.Next(rows.Length)], QueryNoise, rows[0].Length, random);
        return queries;
    }

    /// <summary>Brute-force nearest row by cosine (the reference for recall).</summary>
    public static int Nearest(float[][] rows, float[] query)
    {
        var best = -1;
        var bestSimilarity = float.NegativeInfinity;
        for (var i = 0; i < rows.Length; i++)
        {
            var s = TensorPrimitives.Dot(rows[i], query);
            if (s > bestSimilarity) { bestSimilarity = s; best = i; }
        }
        return best;
    }

    private static float[] Around(float[]? centre, float noiseNorm, int dimensions, Random random)
    {
        var v = new float[dimensions];
        var sigma = noiseNorm / MathF.Sqrt(dimensions);
        for (var d = 0; d < dimensions; d++) v[d] = (centre?[d] ?? 0f) + sigma * Gaussian(random);
        var norm = TensorPrimitives.Norm(v);
        TensorPrimitives.Divide(v, norm, v);
        return v;
    }

    private static float Gaussian(Random random)
    {
        // Box–Muller transform.
        var u1 = 1.0 - random.NextDouble();
        var u2 = random.NextDouble();
        return (float)(Math.Sqrt(-2.0 * Math.Log(u1)) * Math.Cos(2.0 * Math.PI * u2));
    }
}
