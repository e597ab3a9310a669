using System.Numerics.Tensors;
using RewriteProxy.Embedding;

namespace RewriteProxy.Tests.Embedding;

public sealed class VectorMathTests
{
    /// <summary>Float summation order differs between implementations; 1e-6 is the agreement the task asks for.</summary>
    const double Agreement = 1e-6;

    public static TheoryData<int> Seeds() => [1, 2, 3, 4, 5, 6, 7, 8];

    // Outside source: System.Numerics.Tensors.TensorPrimitives.CosineSimilarity.
    [Theory]
    [MemberData(nameof(Seeds))]
    public void Cosine_equals_TensorPrimitives_CosineSimilarity(int seed)
    {
        var random = new Random(seed);
        float[] a = RandomVector(random, 384);
        float[] b = RandomVector(random, 384);

        Assert.Equal(TensorPrimitives.CosineSimilarity(a, b), VectorMath.Cosine(a, b), Agreement);
    }

    // Outside source: a plain double-precision sum of products, the definition of the dot product.
    [Theory]
    [MemberData(nameof(Seeds))]
    public void Dot_equals_the_sum_of_products(int seed)
    {
        var random = new Random(seed);
        float[] a = RandomVector(random, 384);
        float[] b = RandomVector(random, 384);
        double expected = 0;
        for (int i = 0; i < a.Length; i++)
            expected += (double)a[i] * b[i];

        Assert.Equal(expected, VectorMath.Dot(a, b), 1e-4);
    }

    [Fact]
    public void Cosine_of_a_vector_with_itself_is_one_and_with_its_opposite_minus_one()
    {
        float[] a = RandomVector(new Random(9), 384);
        float[] opposite = a.Select(x => -x).ToArray();

        Assert.Equal(1.0, VectorMath.Cosine(a, a), Agreement);
        Assert.Equal(-1.0, VectorMath.Cosine(a, opposite), Agreement);
    }

    [Fact]
    public void Cosine_with_the_zero_vector_is_zero_not_NaN()
    {
        float[] a = RandomVector(new Random(10), 384);
        var zero = new float[384];

        Assert.Equal(0f, VectorMath.Cosine(a, zero));
        Assert.Equal(0f, VectorMath.Cosine(zero, zero));
    }

    [Fact]
    public void Vectors_of_different_length_are_refused() =>
        Assert.Throws<ArgumentException>(() => VectorMath.Cosine(new float[3], new float[4]));

    static float[] RandomVector(Random random, int length)
    {
        var vector = new float[length];
        for (int i = 0; i < length; i++)
            vector[i] = (float)(random.NextDouble() * 2 - 1);
        return vector;
    }
}
