import type { EntityManager } from 'typeorm';
import { UserEntity } from '../db/entities/core.entities';

/** Dates in mails: `YYYY-MM-DD HH:MM UTC` (ISO 8601 date and time, minutes, stated zone). */
export function mailDate(d: Date | string): string {
  return `${new Date(d).toISOString().slice(0, 16).replace('T', ' ')} UTC`;
}

/** Active lab staff (operators) of the given institutes: whom a campaign's review outcome concerns. */
export async function labAddresses(manager: EntityManager, instituteIds: (string | null | undefined)[]): Promise<string[]> {
  const ids = [...new Set(instituteIds.filter((x): x is string => !!x))];
  if (!ids.length) return [];
  const users = await manager.getRepository(UserEntity).createQueryBuilder('u').where('u.role = :r', { r: 'operator' }).andWhere('u.institute_id IN (:...ids)', { ids }).getMany();
  return [...new Set(users.map((u) => u.email))];
}
