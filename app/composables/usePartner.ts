/**
 * What every tab of a partner needs (useLab's twin): its id from the route, the partner (or
 * the 404 page when it is not there or not the user's), and whether the user may change it.
 */
export async function usePartner() {
  const account = useAccountStore()
  const id = useRoute().params.id as string
  const canWrite = computed(() => account.allows('partners:update'))
  const { data: partner, refresh } = await useRecordOr404(useFetch(`/api/console/partners/${id}`), 'partner')
  return { id, partner, refresh, canWrite, account }
}
