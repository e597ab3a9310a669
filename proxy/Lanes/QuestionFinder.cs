using System.Security.Cryptography;
using System.Text;
using Microsoft.Extensions.Logging;
using RewriteProxy.Cache;
using RewriteProxy.Hosting;
using RewriteProxy.Store;
using RewriteProxy.Telemetry;

namespace RewriteProxy.Lanes;

/// <summary>
/// The lane flow's side of question location: one <see cref="TemplateLearner"/> for the process, templates loaded from
/// the store at start and saved when learned, and the per-call counts. A store failure never fails a call: learning
/// then only lasts until the process ends.
/// </summary>
public sealed class QuestionFinder(IRewriteStore store, RewriteProxyOptions options, ILogger<QuestionFinder> log)
{
    /// <summary>The response header value and tally name of a call whose question is not located with confidence.</summary>
    public const string Unlocated = "unlocated";

    readonly TemplateLearner _learner = CreateLearner(store, log);

    public TemplateLearner Learner => _learner;

    static TemplateLearner CreateLearner(IRewriteStore store, ILogger log)
    {
        var learner = new TemplateLearner();
        learner.Learned = t =>
        {
            QuestionMetrics.TemplatesLearned.WithLabels(t.Lane).Inc();
            log.LogInformation("lane {Lane}: learned a prompt template from {Calls} calls", t.Lane, t.LearnedFrom);
            try
            {
                store.SaveTemplate(new TemplateRow(t.Key, t.Lane, t.Partition, t.Prefix, t.Suffix, t.LearnedFrom, t.LearnedAt));
            }
            catch (StoreException e)
            {
                log.LogWarning("store: a learned template was not saved ({Reason}); it is kept until the process ends", e.Message);
            }
        };
        return learner;
    }

    /// <summary>Makes the templates the store kept (younger than Store:Ttl) known again; called once at start.</summary>
    public async Task LoadTemplatesAsync(CancellationToken cancel)
    {
        try
        {
            var rows = await store.TemplatesAsync(DateTimeOffset.UtcNow - options.Store.Ttl, cancel);
            _learner.Load(rows.Select(r => new LearnedTemplate(r.Lane, r.LearnKey, r.PartitionHash, r.Prefix, r.Suffix, r.LearnedFrom, r.LearnedAt)));
            if (rows.Count > 0) log.LogInformation("loaded {Count} learned prompt templates", rows.Count);
        }
        catch (StoreException e)
        {
            log.LogWarning("store: learned templates not loaded ({Reason}); they are learned again from traffic", e.Message);
        }
    }

    /// <summary>Locates the question of <paramref name="text"/> (the last user message) and counts how it was found.</summary>
    /// <param name="lane">The lane called.</param>
    /// <param name="text">The last user message.</param>
    /// <param name="partition">The caller's partition, kept with a learned template so a purge by partition removes it.</param>
    /// <param name="learningKey">The scope with the whole last user message left out (ScopeKey over the whole message).</param>
    public LocatedQuestion Locate(LaneOptions lane, string text, string learningKey, string partition)
    {
        var located = QuestionLocator.Locate(text, lane.Name, learningKey, partition, _learner);
        Count(lane.Name, located.Confident ? located.Source : Unlocated);
        if (!located.Confident) QuestionMetrics.Unlocated.WithLabels(lane.Name).Inc();
        return located;
    }

    /// <summary>
    /// The question of a call whose extraction found the last user message (<paramref name="site"/>): narrowed by a
    /// learned template or a marker, with the scope and exact key that follow from how sure the location is.
    /// </summary>
    /// <param name="lane">The lane called.</param>
    /// <param name="site">The extractor's site: the whole last user message.</param>
    /// <param name="partition">The caller's partition.</param>
    /// <param name="scopeOf">The call's scope key with a given site as its question (ScopeKey.Compute over the call).</param>
    public LaneQuestion Resolve(LaneOptions lane, QuestionSite site, string partition, Func<QuestionSite, string> scopeOf)
    {
        if (lane.QuestionPattern is not null)
        {
            Count(lane.Name, QuestionSource.Pattern);
            return new LaneQuestion(site, QuestionSource.Pattern, true, scopeOf(site), QuestionText.Normalize(site.Question));
        }
        var text = site.MessageText;
        var whole = new QuestionSite(text, site.MessageIndex, text, 0, text.Length);
        var learningKey = scopeOf(whole);
        var located = Locate(lane, text, learningKey, partition);
        var question = text.Substring(located.Start, located.Length);
        var found = new QuestionSite(question, site.MessageIndex, text, located.Start, located.Length);
        var unlocatedScope = UnlocatedScope(learningKey);
        var wholeNormalized = QuestionText.Normalize(text);
        if (!located.Confident) return new LaneQuestion(found, located.Source, false, unlocatedScope, wholeNormalized);
        // The bare question keeps the site, scope and key it always had (the scope over the whole message is the
        // learning key); a templated one is scoped with its template around it.
        if (located.Source == QuestionSource.Message)
            return new LaneQuestion(site, located.Source, true, learningKey, QuestionText.Normalize(site.Question));
        return new LaneQuestion(found, located.Source, true, scopeOf(found), QuestionText.Normalize(question), unlocatedScope,
            wholeNormalized);
    }

    /// <summary>The scope of unlocated calls: the learning key, marked so that no located call's scope can equal it.</summary>
    static string UnlocatedScope(string learningKey) =>
        Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes("unlocated\n" + learningKey)));

    void Count(string lane, string source)
    {
        try
        {
            store.Count(lane, Tally.Question(source));
        }
        catch (StoreException)
        {
            // A tally is a statistic; losing one never fails a call.
        }
    }
}

/// <summary>The question of one lane call, where its entries live, and how far the lane may trust it.</summary>
/// <param name="Site">The located question (or, when not confident, the best guess, used only to measure drift).</param>
/// <param name="Source">A <see cref="QuestionSource"/> word.</param>
/// <param name="Confident">Located with confidence: semantic lookup on and the drift guard enforced (if the lane enforces).</param>
/// <param name="Scope">The scope key of the call's entries. Unlocated calls have a scope of their own, so their
/// whole-message entries never meet a located question's lookup.</param>
/// <param name="Normalized">The exact-lookup key: the question's normal form, or the whole message's when unlocated.</param>
/// <param name="EarlierScope">For calls located by a template or marker: the unlocated scope that the same message
/// had before its template was learned, so a repeat still hits exactly.</param>
/// <param name="WholeNormalized">The whole message's exact key in <paramref name="EarlierScope"/>.</param>
public sealed record LaneQuestion(QuestionSite Site, string Source, bool Confident, string Scope, string Normalized,
    string? EarlierScope = null, string? WholeNormalized = null)
{
    /// <summary>The <c>X-Rewrite-Question</c> value: how the question was found, or <c>unlocated</c>.</summary>
    public string HeaderValue => Confident ? Source : QuestionFinder.Unlocated;
}
