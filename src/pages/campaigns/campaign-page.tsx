import { zodResolver } from '@hookform/resolvers/zod';
import { MeasuredRatioChoice } from './measured-ratio-choice';
import { useState, type ReactNode } from 'react';
import { useForm } from 'react-hook-form';
import { Link, useParams } from 'react-router';
import { campaignRoleLabels, campaignStateLabels, referenceRatioOverride, updateCampaignSchema, type Campaign, type ReferenceRatioOverride, type UpdateCampaign } from '../../../shared/campaigns';
import { useCampaign, useCampaignAction, useTickChecklist, useUpdateCampaign, type CampaignAction } from '../../api/campaigns';
import { ConfirmDialog, type ConfirmField } from '../../components/confirm-dialog';
import { typeset } from '../../components/typeset';
import { Button, EmptyState, Field, inputClass, Panel } from '../../components/ui';
import { isoMinute, plural } from '../../lib/format';
import { describeError } from '../../lib/api-client';
import { CampaignCertificatesPanel } from '../certificates/campaign-certificates-panel';
import { CampaignClosuresPanel } from '../network/campaign-closures-panel';
import { CampaignUploadsPanel } from '../uploads/campaign-uploads-panel';
import { BudgetTable } from '../registry/budget-editor';
import { applyServerErrors, Facts, FormError, groupDigits, sci } from '../registry/registry-ui';
import { CampaignStateBadge } from './campaign-state';
import { StandardUncertaintyCaution } from '../../components/cautions';

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
      <CampaignReview campaign={c} />
      <CampaignOverview campaign={c} />
      {c.allowed.edit && <CampaignEditor campaign={c} />}
      <CampaignBudgets campaign={c} />
      <CampaignUploadsPanel campaignId={c.id} campaignState={c.state} canUpload={c.allowed.edit} />
      <CampaignCertificatesPanel campaignId={c.id} campaignState={c.state} exceptions={c.review.exceptions} fourEyes={c.review.fourEyes} resultComputed={c.review.resultComputed} />
      <CampaignClosuresPanel campaignId={c.id} />
      <CampaignTimeline campaign={c} />
      <StandardUncertaintyCaution />
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

type DialogSpec = {
  action: CampaignAction;
  title: string;
  consequences: ReactNode[];
  fields: ConfirmField[];
  confirmLabel: string;
  variant?: 'primary' | 'danger';
};

function dialogFor(action: CampaignAction, c: Campaign): DialogSpec {
  const period = `${isoMinute(c.periodStart)} – ${isoMinute(c.periodEnd)} UTC`;
  const justify = c.review.exceptions.length > 0;
  const unknown = !c.review.resultComputed;
  switch (action) {
    case 'submit':
      return {
        action, title: `Submit “${c.name}” for review?`, confirmLabel: 'Submit for review',
        consequences: [
          `The campaign (${c.clockA.name} → ${c.clockB.name}, ${period}) goes to the coordinating institute as it stands now.`,
          'The coordinating institute is mailed; you cannot change the campaign or upload series until it is returned.',
        ],
        fields: [{ name: 'note', label: 'Note for the reviewer', hint: 'Optional; kept on the timeline.' }],
      };
    case 'start-review':
      return {
        action, title: `Start reviewing “${c.name}”?`, confirmLabel: 'Start review',
        consequences: ['The campaign moves to “in review”; the lab sees that you have taken it.', 'The reviewer’s checklist starts empty; every tick is audited.'],
        fields: [{ name: 'note', label: 'Note', hint: 'Optional; kept on the timeline.' }],
      };
    case 'accept':
      return {
        action, title: `Accept “${c.name}”?`, confirmLabel: justify ? 'Accept with justification' : 'Accept', variant: 'primary',
        consequences: [
          'The campaign becomes “accepted”: its result can be certified and it enters reconciliation.',
          `Both labs are mailed your comment${justify ? ' and justification' : ''}; both are kept in the audit trail and printed on the certificate.`,
          ...(c.review.fourEyes ? ['Four-eyes rule: another coordinator will have to issue the certificate.'] : []),
          ...c.review.exceptions.map((x) => <span key={x.code} className="font-medium text-disagree-800">Exception: {x.text}</span>),
        ],
        fields: [
          { name: 'comment', label: 'Reviewer’s comment', required: true, minLength: 5, rows: 3 },
          ...(justify ? [{ name: 'justification', label: 'Why is it acceptable despite the exceptions above?', required: true, minLength: 10, rows: 3 }] : []),
          ...(unknown ? [{ name: 'justification', label: 'Justification, in case the result calls for one', rows: 3,
            hint: 'No result has been computed yet. Accepting computes it; if Eₙ does not agree, the uptime is low or no result can be formed, a justification of at least 10 characters is required.' }] : []),
        ],
      };
    case 'return':
      return {
        action, title: `Return “${c.name}” to the lab?`, confirmLabel: 'Return to the lab', variant: 'danger',
        consequences: ['The campaign goes back to the lab as “returned”; they can change it and submit again.', 'Both labs are mailed the reason.'],
        fields: [{ name: 'reason', label: 'Reason for the lab', required: true, minLength: 5, rows: 3 }],
      };
  }
}

function CampaignActions({ campaign: c }: { campaign: Campaign }) {
  const act = useCampaignAction();
  const [dialog, setDialog] = useState<DialogSpec | null>(null);
  const open = (action: CampaignAction) => { act.reset(); setDialog(dialogFor(action, c)); };
  const any = c.allowed.submit || c.allowed.startReview || c.allowed.accept || c.allowed.return;
  const unticked = c.review.checklist.filter((i) => !i.checked).length;
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
            {c.allowed.submit && <Button onClick={() => open('submit')}>Submit for review…</Button>}
            {c.allowed.startReview && <Button onClick={() => open('start-review')}>Start review…</Button>}
            {c.allowed.accept && <Button onClick={() => open('accept')} disabled={unticked > 0} title={unticked ? 'Tick every checklist item first' : undefined}>Accept…</Button>}
            {c.allowed.return && <Button variant="danger" onClick={() => open('return')}>Return to the lab…</Button>}
          </div>
          {c.allowed.accept && unticked > 0 && <p className="mt-2 text-xs text-ink-500">{plural(unticked, 'checklist item')} still to tick before you can accept.</p>}
          {c.allowed.submit && <p className="mt-2 text-xs text-ink-500">Submitting sends an e-mail to the coordinating institute; the campaign cannot be changed until it is returned.</p>}
        </Panel>
      )}
      {dialog && (
        <ConfirmDialog open title={dialog.title} consequences={dialog.consequences} fields={dialog.fields} confirmLabel={dialog.confirmLabel} variant={dialog.variant}
          pending={act.isPending} error={act.isError ? describeError(act.error) : null} onCancel={() => setDialog(null)}
          onConfirm={(v) => act.mutate({ id: c.id, action: dialog.action, ...v }, { onSuccess: () => setDialog(null) })} />
      )}
    </>
  );
}

/** The reviewer's checklist, the exceptions that need a justification, and the recorded decision. */
function CampaignReview({ campaign: c }: { campaign: Campaign }) {
  const tick = useTickChecklist();
  const r = c.review;
  // Campaigns accepted before the review desk kept its record have no checklist to show.
  if (c.state !== 'in_review' && !r.acceptedBy) return null;
  return (
    <Panel title="Review">
      <div className="grid gap-5 md:grid-cols-2">
        <fieldset>
          <legend className="mb-2 text-sm font-semibold text-ink-700">Reviewer’s checklist</legend>
          <ul className="space-y-2 text-sm" data-testid="review-checklist">
            {r.checklist.map((i) => (
              <li key={i.item}>
                <label className="flex items-start gap-2">
                  <input type="checkbox" className="mt-0.5 h-4 w-4 accent-ink-600" checked={i.checked} disabled={!c.allowed.tick || tick.isPending}
                    onChange={(e) => tick.mutate({ id: c.id, item: i.item, checked: e.target.checked })} />
                  <span>
                    {typeset(i.label)}
                    {i.checked && i.by && <span className="block text-xs text-ink-500">ticked by {i.by}, {isoMinute(i.at ?? '')} UTC</span>}
                  </span>
                </label>
              </li>
            ))}
          </ul>
          <FormError text={tick.isError ? describeError(tick.error) : null} />
        </fieldset>
        <div className="text-sm">
          <p className="mb-2 font-semibold text-ink-700">Exceptions</p>
          {!r.resultComputed ? (
            <p className="text-ink-600">No result has been computed yet; accepting computes it and asks for a justification if Eₙ does not agree or the uptime is below {Math.round(r.minUptimeFraction * 100)} %.</p>
          ) : r.exceptions.length === 0 ? (
            <p className="text-ink-600">None from the newest result: Eₙ agrees and the uptime is at least {Math.round(r.minUptimeFraction * 100)} %.</p>
          ) : (
            <ul className="space-y-1" data-testid="review-exceptions">
              {r.exceptions.map((x) => <li key={x.code} className="rounded bg-disagree-100 px-2 py-1 text-disagree-800"><span aria-hidden>⚑ </span>{x.text}</li>)}
            </ul>
          )}
          {r.exceptions.length > 0 && <p className="mt-2 text-xs text-ink-500">Accepting or certifying needs a written justification; it is audited and printed on the certificate.</p>}
          {r.fourEyes && <p className="mt-2 text-xs text-ink-500">Four-eyes rule: the coordinator who accepts may not issue the certificate.</p>}
          {r.acceptedBy && (
            <Facts items={[
              ['Accepted by', `${r.acceptedBy}, ${isoMinute(r.acceptedAt ?? '')} UTC`],
              ['Comment', r.acceptanceComment ?? '—'],
              ...(r.acceptanceJustification ? [['Accepted despite', r.acceptanceExceptions.join(' ')] as [string, string], ['Justification', r.acceptanceJustification] as [string, string]] : []),
            ]} />
          )}
        </div>
      </div>
    </Panel>
  );
}

function ClockFacts({ label, clock, budget, current, site }: { label: string; clock: Campaign['clockA']; budget: Campaign['budgetA']; current: number; site: Campaign['siteA'] }) {
  return (
    <div>
      <h3 className="mb-1 text-sm font-semibold text-ink-700">{label}</h3>
      <Facts items={[
        ['Clock', <Link key="c" to={`/clocks/${clock.id}`}>{clock.name}</Link>],
        ['Institute', clock.institute.code],
        ['Species', clock.speciesLabel],
        ['Nominal frequency', <span key="f" className="font-mono" title={clock.nominalFrequencyHz}>{groupDigits(clock.nominalFrequencyHz)} Hz</span>],
        ['Site during the campaign', <Link key="s" to={`/sites/${site.id}`} data-testid={`${label.startsWith('Clock A') ? 'site-a' : 'site-b'}`}>{site.name}</Link>],
        ['Budget', <span key="b">version {budget.version}{current !== budget.version ? <span className="text-brass-600"> (version {current} is newer)</span> : ''}, standard uncertainty u = {sci(budget.totalUncertainty)} (k = 1)</span>],
      ]} />
    </div>
  );
}

function CampaignOverview({ campaign: c }: { campaign: Campaign }) {
  return (
    <Panel title="Campaign">
      <div className="grid gap-5 md:grid-cols-2">
        <ClockFacts label="Clock A (owner)" clock={c.clockA} budget={c.budgetA} current={c.currentBudgetVersionA} site={c.siteA} />
        <ClockFacts label="Clock B" clock={c.clockB} budget={c.budgetB} current={c.currentBudgetVersionB} site={c.siteB} />
      </div>
      <div className="mt-4 border-t border-paper-200 pt-4">
        <Facts items={[
          ['Role', <span key="role" data-testid="campaign-role-fact">{campaignRoleLabels[c.role]}</span>],
          ...(c.localTie ? [['Local tie ΔC = C(site B) − C(site A)', <span key="tie" data-testid="local-tie">{c.localTie.deltaC_m2s2.toFixed(4)} m²/s² ± {c.localTie.uncertainty_m2s2.toFixed(4)} m²/s² (standard, k = 1) · {c.localTie.source}</span>] as [string, React.ReactNode]] : []),
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
      <p className="text-sm font-semibold text-ink-700 md:col-span-3">Use a different reference ratio {typeset('ν_B/ν_A')}</p>
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
