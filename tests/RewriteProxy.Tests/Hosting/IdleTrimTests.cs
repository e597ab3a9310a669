using System.Net;
using Microsoft.AspNetCore.Http;
using System.Text;
using Microsoft.Extensions.DependencyInjection;
using RewriteProxy.Hosting;
using RewriteProxy.Tests.Fixtures;

namespace RewriteProxy.Tests.Hosting;

/// <summary>
/// The idle trim: when it gives memory back (<see cref="IdleClock"/>, the rule alone) and what it counts as a request in
/// flight (the real app: a stream is in flight until its last byte).
/// </summary>
public sealed class IdleTrimTests : UpstreamAndProxy
{
    static readonly TimeSpan IdleAfter = TimeSpan.FromSeconds(5);
    const long Mb = 1 << 20;
    const long Start = 260 * Mb;
    const long Grown = Start + IdleTrim.MinGrowthBytes;

    static TimeSpan At(double seconds) => TimeSpan.FromSeconds(seconds);

    /// <summary>The rule as the proxy starts it: 5 s idle, the shipped minimum growth, 260 MB resident at start.</summary>
    static IdleClock NewClock() => new(IdleAfter, IdleTrim.MinGrowthBytes, Start);

    [Fact]
    public void Nothing_is_trimmed_before_the_first_request_however_long_the_proxy_idles()
    {
        var clock = NewClock();
        Assert.False(clock.ShouldTrim(At(1), started: 0, inFlight: 0, Grown));
        Assert.False(clock.ShouldTrim(At(60), started: 0, inFlight: 0, Grown));
    }

    [Fact]
    public void After_a_burst_it_trims_once_the_idle_time_has_passed_and_not_before()
    {
        var clock = NewClock();
        Assert.False(clock.ShouldTrim(At(1), started: 300, inFlight: 300, Grown));
        // The streams ended between two checks: the quiet time counts from the last check that saw one in flight.
        Assert.False(clock.ShouldTrim(At(2), started: 300, inFlight: 0, Grown));
        Assert.False(clock.ShouldTrim(At(5.9), started: 300, inFlight: 0, Grown));
        Assert.True(clock.ShouldTrim(At(6), started: 300, inFlight: 0, Grown));
    }

    [Fact]
    public void A_long_stream_in_flight_keeps_it_from_trimming()
    {
        var clock = NewClock();
        for (var s = 1; s <= 120; s++) Assert.False(clock.ShouldTrim(At(s), started: 1, inFlight: 1, Grown));
        Assert.False(clock.ShouldTrim(At(121), started: 1, inFlight: 0, Grown));
        Assert.True(clock.ShouldTrim(At(126), started: 1, inFlight: 0, Grown));
    }

    [Fact]
    public void A_request_during_the_quiet_time_starts_it_again()
    {
        var clock = NewClock();
        Assert.False(clock.ShouldTrim(At(1), started: 10, inFlight: 0, Grown));
        Assert.False(clock.ShouldTrim(At(4), started: 11, inFlight: 0, Grown)); // a short request came and went
        Assert.False(clock.ShouldTrim(At(8), started: 11, inFlight: 0, Grown));
        Assert.True(clock.ShouldTrim(At(9), started: 11, inFlight: 0, Grown));
    }

    [Fact]
    public void Growth_below_the_minimum_is_not_worth_a_blocking_collection()
    {
        var clock = NewClock();
        Assert.False(clock.ShouldTrim(At(1), started: 5, inFlight: 0, Grown - 1));
        Assert.False(clock.ShouldTrim(At(30), started: 5, inFlight: 0, Grown - 1));
    }

    [Fact]
    public void It_trims_once_per_idle_spell_and_again_only_after_new_requests_and_new_growth()
    {
        var clock = NewClock();
        Assert.False(clock.ShouldTrim(At(1), started: 300, inFlight: 0, Grown + 40 * Mb));
        Assert.True(clock.ShouldTrim(At(6), started: 300, inFlight: 0, Grown + 40 * Mb));
        clock.Trimmed(Start + 10 * Mb);
        Assert.False(clock.ShouldTrim(At(7), started: 300, inFlight: 0, Grown + 40 * Mb));
        Assert.False(clock.ShouldTrim(At(60), started: 300, inFlight: 0, Grown + 40 * Mb));

        // New traffic, but the resident size grew less than the minimum over what the trim left.
        Assert.False(clock.ShouldTrim(At(61), started: 301, inFlight: 0, Start + 20 * Mb));
        Assert.False(clock.ShouldTrim(At(70), started: 301, inFlight: 0, Start + 20 * Mb));
        // More traffic and enough growth.
        Assert.False(clock.ShouldTrim(At(71), started: 600, inFlight: 0, Start + 30 * Mb));
        Assert.True(clock.ShouldTrim(At(76), started: 600, inFlight: 0, Start + 30 * Mb));
    }

    [Fact]
    public async Task A_passthrough_stream_counts_as_in_flight_until_its_last_byte()
    {
        var release = new TaskCompletionSource(TaskCreationOptions.RunContinuationsAsynchronously);
        var firstSent = new TaskCompletionSource(TaskCreationOptions.RunContinuationsAsynchronously);
        Upstream.Handler = async (context, _) =>
        {
            context.Response.ContentType = "text/event-stream";
            await context.Response.WriteAsync("data: {\"first\":true}\n\n");
            await context.Response.Body.FlushAsync();
            firstSent.TrySetResult();
            await release.Task;
            await context.Response.WriteAsync("data: [DONE]\n\n");
        };
        var trim = Proxy.Services.GetRequiredService<IdleTrim>();
        var before = trim.Started;

        using var request = new HttpRequestMessage(HttpMethod.Post, "/v1/chat/completions")
        {
            Content = new StringContent(LaneCalls.Request("Plain streamed call").ToJsonString(), Encoding.UTF8, "application/json"),
        };
        using var response = await Proxy.Client.SendAsync(request, HttpCompletionOption.ResponseHeadersRead);
        Assert.Equal(HttpStatusCode.OK, response.StatusCode);
        await firstSent.Task.WaitAsync(TimeSpan.FromSeconds(30));
        Assert.Equal(before + 1, trim.Started);
        Assert.Equal(1, trim.InFlight);

        release.SetResult();
        var text = await response.Content.ReadAsStringAsync();
        Assert.Contains("[DONE]", text);
        // The middleware's finally runs after the response completes; give it the moment it needs.
        for (var i = 0; i < 100 && trim.InFlight != 0; i++) await Task.Delay(20);
        Assert.Equal(0, trim.InFlight);
    }
}
