using System.Numerics.Tensors;

namespace RewriteProxy.Tests.Cache;

/// <summary>Seeded unit vectors for the index tests: uniform ones, and clustered ones where near neighbours exist.</summary>
internal static class VectorIndexTestData
{
    public static float[] Unit(Random random, int dimensions) => Around(null, 1f, dimensions, random);

    public static float[][] Units(int count, int dimensions, int seed)
    {
        var random = new Random(seed);
        return Enumerable.Range(0, count).Select(_ => Unit(random, dimensions)).ToArray();
    }

    /// <summary>Members at cosine ≈ 0.8 to one of <paramref name="centres"/> random centres (≈ 0.64 to each other).</summary>
    public static float[][] Clustered(int count, int centres, int dimensions, int seed)
    {
        var random = new Random(seed);
        var c = Enumerable.Range(0, centres).Select(_ => Unit(random, dimensions)).ToArray();
        return Enumerable.Range(0, count).Select(_ => Around(c[random.Next(centres)], 0.75f, dimensions, random)).ToArray();
    }

    /// <summary>A paraphrase-like query: the vector plus noise of norm ≈ <paramref name="noise"/>, renormalised.</summary>
    public static float[] Perturbed(float[] vector, float noise, Random random) => Around(vector, noise, vector.Length, random);

    /// <summary>A unit vector at exactly <paramref name="cosine"/> to unit <paramref name="axis"/> (built in the
    /// plane of the axis and a second orthogonal unit direction).</summary>
    public static float[] AtCosine(float[] axis, float[] orthogonal, float cosine)
    {
        var sine = MathF.Sqrt(1 - cosine * cosine);
        var v = new float[axis.Length];
        for (var i = 0; i < v.Length; i++) v[i] = cosine * axis[i] + sine * orthogonal[i];
        return v;
    }

    private static float[] Around(float[]? centre, float noiseNorm, int dimensions, Random random)
    {
        var v = new float[dimensions];
        var sigma = noiseNorm / MathF.Sqrt(dimensions);
        for (var d = 0; d < dimensions; d++) v[d] = (centre?[d] ?? 0f) + sigma * Gaussian(random);
        TensorPrimitives.Divide(v, TensorPrimitives.Norm(v), v);
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
