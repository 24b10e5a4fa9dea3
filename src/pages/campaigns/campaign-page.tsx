import { zodResolver } from '@hookform/resolvers/zod';
import { MeasuredRatioChoice } from './measured-ratio-choice';
import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { Link, useParams } from 'react-router';
import { campaignStateLabels, referenceRatioOverride, updateCampaignSchema, type Campaign, type ReferenceRatioOverride, type UpdateCampaign } from '../../../shared/campaigns';
import { useCampaign, useCampaignAction, useUpdateCampaign, type CampaignAction } from '../../api/campaigns';
import { Button, Caution, EmptyState, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { CampaignCertificatesPanel } from '../certificates/campaign-certificates-panel';
import { CampaignUploadsPanel } from '../uploads/campaign-uploads-panel';
import { BudgetTable } from '../registry/budget-editor';
import { applyServerErrors, Facts, FormError, groupDigits, sci } from '../registry/registry-ui';
import { CampaignStateBadge } from './campaign-state';

// The campaign page is a stack of sections; other features insert theirs as one line each (uploads, results).

export function CampaignPage() {
  const { id = '' } = useParams();
  const campaign = useCampaign(id);
  if (campaign.isPending) return <p className="text-ink-500">Loading…</p>;
  if (campaign.isError) return <EmptyState title="This campaign could not be loaded">{describeError(campaign.error)}</EmptyState>;
  const c = campaign.data;
  return (
    <>
      <CampaignHeader campaign={c} />
      <CampaignActions campaign={c} />
      <CampaignOverview campaign={c} />
      {c.allowed.edit && <CampaignEditor campaign={c} />}
      <CampaignBudgets campaign={c} />
      <CampaignUploadsPanel campaignId={c.id} campaignState={c.state} canUpload={c.allowed.edit} />
      <CampaignCertificatesPanel campaignId={c.id} campaignState={c.state} />
      <CampaignTimeline campaign={c} />
      <Caution />
    </>
  );
}

function CampaignHeader({ campaign: c }: { campaign: Campaign }) {
  return (
    <header className="flex flex-wrap items-end justify-between gap-3">
      <div>
        <p className="text-sm text-ink-500"><Link to="/campaigns">Campaigns</Link> / {c.institute.code}</p>
        <h1 data-testid="campaign-title">{c.name}</h1>
        <p className="mt-1 flex items-center gap-2 text-sm text-ink-600"><CampaignStateBadge state={c.state} /> {c.clockA.name} → {c.clockB.name} over {c.link.name}</p>
      </div>
      <nav className="flex gap-4 text-sm" aria-label="Campaign">
        <Link to={`/campaigns/${c.id}/results`}>Results</Link>
        <Link to={`/audit/campaigns/${c.id}`}>Audit trail</Link>
      </nav>
    </header>
  );
}

function CampaignActions({ campaign: c }: { campaign: Campaign }) {
  const act = useCampaignAction();
  const [reason, setReason] = useState('');
  const [returning, setReturning] = useState(false);
  const run = (action: CampaignAction) => act.mutate({ id: c.id, action, reason }, { onSuccess: () => { setReturning(false); setReason(''); } });
  const any = c.allowed.submit || c.allowed.startReview || c.allowed.accept || c.allowed.return;
  return (
    <>
      {c.state === 'returned' && c.returnReason && (
        <aside className="rounded-md border-l-4 border-disagree-600 bg-disagree-100 px-4 py-3 text-sm text-disagree-800" role="note">
          <strong>Returned by the coordinating institute: </strong>{c.returnReason}
        </aside>
      )}
      {any && (
        <Panel title="Next step">
          <div className="flex flex-wrap items-center gap-2">
            {c.allowed.submit && <Button onClick={() => run('submit')} disabled={act.isPending}>Submit for review</Button>}
            {c.allowed.startReview && <Button onClick={() => run('start-review')} disabled={act.isPending}>Start review</Button>}
            {c.allowed.accept && <Button onClick={() => run('accept')} disabled={act.isPending}>Accept</Button>}
            {c.allowed.return && !returning && <Button variant="danger" onClick={() => setReturning(true)}>Return to the lab…</Button>}
          </div>
          {returning && (
            <div className="mt-3 flex items-end gap-2">
              <div className="flex-1"><Field label="Reason for the lab"><input className={inputClass} value={reason} onChange={(e) => setReason(e.target.value)} /></Field></div>
              <Button variant="danger" onClick={() => run('return')} disabled={act.isPending}>Return</Button>
              <Button variant="quiet" onClick={() => setReturning(false)}>Cancel</Button>
            </div>
          )}
          {c.allowed.submit && <p className="mt-2 text-xs text-ink-500">Submitting sends an e-mail to the coordinating institute; the campaign cannot be changed until it is returned.</p>}
          <FormError text={act.isError ? describeError(act.error) : null} />
        </Panel>
      )}
    </>
  );
}

function ClockFacts({ label, clock, budget, current }: { label: string; clock: Campaign['clockA']; budget: Campaign['budgetA']; current: number }) {
  return (
    <div>
      <h3 className="mb-1 text-sm font-semibold text-ink-700">{label}</h3>
      <Facts items={[
        ['Clock', <Link key="c" to={`/clocks/${clock.id}`}>{clock.name}</Link>],
        ['Institute', clock.institute.code],
        ['Species', clock.speciesLabel],
        ['Nominal frequency', <span key="f" className="font-mono" title={clock.nominalFrequencyHz}>{groupDigits(clock.nominalFrequencyHz)} Hz</span>],
        ['Site', <Link key="s" to={`/sites/${clock.site.id}`}>{clock.site.name}</Link>],
        ['Budget', <span key="b">version {budget.version}{current !== budget.version ? <span className="text-brass-600"> (version {current} is newer)</span> : ''}, standard uncertainty u = {sci(budget.totalUncertainty)} (k = 1)</span>],
      ]} />
    </div>
  );
}

function CampaignOverview({ campaign: c }: { campaign: Campaign }) {
  return (
    <Panel title="Campaign">
      <div className="grid gap-5 md:grid-cols-2">
        <ClockFacts label="Clock A (owner)" clock={c.clockA} budget={c.budgetA} current={c.currentBudgetVersionA} />
        <ClockFacts label="Clock B" clock={c.clockB} budget={c.budgetB} current={c.currentBudgetVersionB} />
      </div>
      <div className="mt-4 border-t border-paper-200 pt-4">
        <Facts items={[
          ['Link', <Link key="l" to={`/links/${c.link.id}`}>{c.link.name}</Link>],
          ['Period', `${c.periodStart.slice(0, 16).replace('T', ' ')} – ${c.periodEnd.slice(0, 16).replace('T', ' ')} UTC`],
          ['Reference ratio ν_B/ν_A', <span key="r" className="font-mono" data-testid="reference-ratio">{c.referenceRatio.value}</span>],
          ['Its relative uncertainty', c.clockA.species === c.clockB.species && c.referenceRatio.value === '1' && c.referenceRatio.relativeUncertainty === 0 ? 'exact (same species: R₀ = 1)' : `${sci(c.referenceRatio.relativeUncertainty, 2)} (standard, k = 1)`],
          ['Source', c.referenceRatio.source],
          ...(c.referenceRatio.justification ? [['Why not the default', c.referenceRatio.justification] as [string, string]] : []),
          ['Operator notes', c.operatorNotes || '—'],
          ['Opened by', `${c.createdBy}, ${c.createdAt.slice(0, 10)}`],
        ]} />
      </div>
    </Panel>
  );
}

function CampaignEditor({ campaign: c }: { campaign: Campaign }) {
  const update = useUpdateCampaign();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, setError, formState: { errors } } = useForm<UpdateCampaign>({
    resolver: zodResolver(updateCampaignSchema) as never,
    defaultValues: { name: c.name, operatorNotes: c.operatorNotes },
  });
  const save = (body: UpdateCampaign) => {
    setFormError(null);
    update.mutate({ id: c.id, body }, { onError: (e) => setFormError(applyServerErrors(e, setError, ['name', 'operatorNotes', 'periodStart', 'periodEnd', 'linkId', 'budgetVersionA', 'budgetVersionB', 'referenceRatio'])) });
  };
  const stale = c.budgetA.version !== c.currentBudgetVersionA || c.budgetB.version !== c.currentBudgetVersionB;
  return (
    <Panel title={`Change this ${campaignStateLabels[c.state].toLowerCase()} campaign`}>
      <form className="grid gap-3 md:grid-cols-2" onSubmit={handleSubmit(save)}>
        <Field label="Name" error={errors.name?.message}><input className={inputClass} {...register('name')} /></Field>
        <Field label="Operator notes" error={errors.operatorNotes?.message}><input className={inputClass} {...register('operatorNotes')} /></Field>
        <div className="flex gap-2 md:col-span-2">
          <Button type="submit" disabled={update.isPending}>Save changes</Button>
          {stale && <Button type="button" variant="quiet" onClick={() => save({ budgetVersionA: c.currentBudgetVersionA, budgetVersionB: c.currentBudgetVersionB })}>Use the newest budget versions</Button>}
          {!c.referenceRatio.isDefault && <Button type="button" variant="quiet" onClick={() => save({ referenceRatio: null })}>Back to the default reference ratio</Button>}
        </div>
        <div className="md:col-span-2"><FormError text={formError} /></div>
      </form>
      <RatioOverrideForm campaign={c} />
      <MeasuredRatioChoice campaign={c} />
    </Panel>
  );
}

/** Replaces the default reference ratio; the justification is required and kept with the campaign. */
function RatioOverrideForm({ campaign: c }: { campaign: Campaign }) {
  const update = useUpdateCampaign();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, setError, formState: { errors } } = useForm<ReferenceRatioOverride>({
    resolver: zodResolver(referenceRatioOverride) as never,
    defaultValues: { value: c.referenceRatio.value, relativeUncertainty: c.referenceRatio.relativeUncertainty, justification: c.referenceRatio.justification ?? '' },
  });
  return (
    <form className="mt-4 grid gap-3 border-t border-paper-200 pt-4 md:grid-cols-3" onSubmit={handleSubmit((body) => {
      setFormError(null);
      update.mutate({ id: c.id, body: { referenceRatio: body } }, {
        onError: (e) => setFormError(applyServerErrors(e, (path, opt) => setError(String(path).replace(/^referenceRatio\./, '') as keyof ReferenceRatioOverride, opt), ['referenceRatio'])),
      });
    })}>
      <p className="text-sm font-semibold text-ink-700 md:col-span-3">Use a different reference ratio ν_B/ν_A</p>
      <Field label="Ratio (decimal)" error={errors.value?.message}><input className={`${inputClass} font-mono`} {...register('value')} /></Field>
      <Field label="Relative uncertainty (k = 1)" error={errors.relativeUncertainty?.message}><input className={`${inputClass} font-mono`} {...register('relativeUncertainty', { setValueAs: (v: string) => (v === '' ? undefined : Number(v)) })} /></Field>
      <Field label="Justification (required)" error={errors.justification?.message}><input className={inputClass} {...register('justification')} /></Field>
      <div className="md:col-span-3"><FormError text={formError} /></div>
      <div className="md:col-span-3"><Button type="submit" variant="quiet" disabled={update.isPending}>Save this reference ratio</Button></div>
    </form>
  );
}

function CampaignBudgets({ campaign: c }: { campaign: Campaign }) {
  return (
    <Panel title="Pinned systematic budgets (fractional)">
      <div className="grid gap-5">
        <div><h3 className="mb-1 text-sm font-semibold">{c.clockA.name}, version {c.budgetA.version}</h3><BudgetTable {...c.budgetA} /></div>
        <div><h3 className="mb-1 text-sm font-semibold">{c.clockB.name}, version {c.budgetB.version}</h3><BudgetTable {...c.budgetB} /></div>
      </div>
    </Panel>
  );
}

function CampaignTimeline({ campaign: c }: { campaign: Campaign }) {
  return (
    <Panel title="Timeline">
      <ol className="space-y-2 text-sm" data-testid="campaign-timeline">
        {c.timeline.map((e, i) => (
          <li key={i} className="flex flex-wrap items-baseline gap-2 border-l-2 border-ink-200 pl-3">
            <span className="font-mono text-xs text-ink-500">{e.at.slice(0, 16).replace('T', ' ')} UTC</span>
            <CampaignStateBadge state={e.toState} />
            <span>{e.actor}</span>
            {e.note && <span className="text-ink-500">— {e.note}</span>}
          </li>
        ))}
      </ol>
    </Panel>
  );
}
