using System.Net.Http.Headers;
using Microsoft.Extensions.Primitives;
using RewriteProxy.Lanes;

namespace RewriteProxy.Tests.Lanes;

/// <summary>
/// The request's Cache-Control field as RFC 9111 §5.2 writes it (<c>Cache-Control = #cache-directive</c>,
/// <c>cache-directive = token [ "=" ( token / quoted-string ) ]</c>, names compared case-insensitively), with the list
/// rules of RFC 9110 §5.6.1 (empty elements allowed) and §5.3 (several field lines are one list). Well-formed values
/// are checked against .NET's own parser, System.Net.Http.Headers.CacheControlHeaderValue, as the reference.
/// </summary>
public sealed class CacheDirectivesTests
{
    [Theory]
    [InlineData("only-if-cached")]
    [InlineData("ONLY-IF-CACHED")]
    [InlineData("Only-If-Cached, max-age=0")]
    [InlineData("max-age=0,only-if-cached")]
    [InlineData("no-cache")]
    [InlineData("No-Store")]
    [InlineData("no-cache, no-store, only-if-cached")]
    [InlineData(" , ,only-if-cached ,, ")]
    [InlineData("max-stale, min-fresh=10, no-transform")]
    [InlineData("only-if-cached-please")]
    // A quoted argument is one value: the names inside it are not directives.
    [InlineData("private=\"only-if-cached, no-store\"")]
    [InlineData("community=\"no-cache, only-if-cached\", max-age=5")]
    // A quoted-pair (\") does not end the quoted string.
    [InlineData("community=\"a\\\", only-if-cached\"")]
    [InlineData("community=\"a\\\"\", only-if-cached")]
    public void Well_formed_values_read_as_the_reference_parser_reads_them(string value)
    {
        var reference = CacheControlHeaderValue.Parse(value);

        var ours = CacheDirectives.Parse(new StringValues(value));

        Assert.Equal((reference.NoCache, reference.NoStore, reference.OnlyIfCached), (ours.NoCache, ours.NoStore, ours.OnlyIfCached));
    }

    [Fact]
    public void Several_field_lines_are_one_list()
    {
        var ours = CacheDirectives.Parse(new StringValues(["max-age=0", "only-if-cached", "no-store"]));
        var reference = CacheControlHeaderValue.Parse("max-age=0, only-if-cached, no-store");

        Assert.Equal((reference.NoCache, reference.NoStore, reference.OnlyIfCached), (ours.NoCache, ours.NoStore, ours.OnlyIfCached));
        Assert.True(ours.OnlyIfCached);
    }

    [Theory]
    // The reference parser rejects these whole; a recipient that skips only the malformed element keeps the rest.
    [InlineData("only-if-cached, community=\"never closed", true)]
    [InlineData("community=\"never closed, only-if-cached", false)]
    [InlineData("only-if-cached, =x", true)]
    [InlineData("@only-if-cached", false)]
    [InlineData("only-if-cached junk, no-store", false)]
    public void A_malformed_element_is_skipped_and_the_well_formed_ones_still_count(string value, bool onlyIfCached)
    {
        Assert.False(CacheControlHeaderValue.TryParse(value, out _), "the case is meant to be malformed");

        Assert.Equal(onlyIfCached, CacheDirectives.Parse(new StringValues(value)).OnlyIfCached);
    }

    [Fact]
    public void No_header_means_no_directives()
    {
        Assert.Equal(default, CacheDirectives.Parse(StringValues.Empty));
        Assert.Equal(default, CacheDirectives.Parse(new StringValues("")));
    }
}
