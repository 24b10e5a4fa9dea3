import { ApiTokenEntity, AuditEventEntity, InstituteEntity, MailOutboxEntity, UserEntity } from './core.entities';
import { CertificateEntity } from './certificates.entities';
import { networkEntities } from './network.entities';
import { registryEntities } from './registry.entities';
import { RatioSeriesEntity } from './uploads.entities';
import { resultsEntities } from './results.entities';
import { MeasuredRatioEntity } from './measured-ratio.entity';

// Every entity the data source knows. Feature entities are added here.
export const entities = [InstituteEntity, UserEntity, ApiTokenEntity, AuditEventEntity, MailOutboxEntity, ...networkEntities, ...registryEntities, RatioSeriesEntity, ...resultsEntities, CertificateEntity, MeasuredRatioEntity];
