import { Caution } from './ui';

/** For pages that show standard uncertainties only (k = 1): the caution without the expanded-uncertainty sentence. */
export function StandardUncertaintyCaution() {
  return (
    <Caution>
      Uncertainties on this page are standard uncertainties (k = 1). Results are for scientific comparison: verify against your national datum authority and your lab’s quality procedures before any use for heights.
    </Caution>
  );
}
