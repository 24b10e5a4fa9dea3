/** "YYYY-MM-DD hh:mm UTC", as on the other pages; `none` when there is no instant. */
export const utcMinute = (iso: string | null | undefined, none = 'never') => (iso ? `${iso.slice(0, 16).replace('T', ' ')} UTC` : none);
